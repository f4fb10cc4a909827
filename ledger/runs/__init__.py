"""Master-record templates, run planning, skid-log import and actuals."""
