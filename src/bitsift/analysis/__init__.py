"""Beyond the ranking: drill-down profiles, redundancy between attributes, selection."""
