"""Service plans and their triggers, the computed due state of every plan, and the nights cache."""
