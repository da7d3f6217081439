"""Running a ranking on a session: cuts, parts, counts read out into scores."""
