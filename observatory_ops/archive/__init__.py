"""The kept record: change history (who, when, before and after) and whole-database backup and restore."""
