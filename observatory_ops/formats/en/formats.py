"""Date formats for every page: day, abbreviated month and year ("23 Mar 2027"), one way throughout.

Django's English locale would show "March 23, 2027" wherever a template prints a date as it is; the
pages that choose a format already use these. Input formats stay the locale's (ISO dates first).
"""
DATE_FORMAT = "d M Y"
DATETIME_FORMAT = "d M Y H:i"
SHORT_DATE_FORMAT = "d M Y"
SHORT_DATETIME_FORMAT = "d M Y H:i"
