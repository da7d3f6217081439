"""What the user asked, checked: options, names, the --where predicate, column types."""
