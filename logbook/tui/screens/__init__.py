"""One screen per module: fleet, pump, reading and event entry, models, plan, help."""
