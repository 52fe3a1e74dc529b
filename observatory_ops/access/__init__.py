"""Who may do what: the four roles and the one decorator every view declares its role with."""
