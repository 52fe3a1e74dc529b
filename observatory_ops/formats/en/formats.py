"""Date formats for every page: day, abbreviated month and year ("23 Mar 2027"), one way throughout.

Django's English locale would show "March 23, 2027" wherever a template prints a date as it is; the
pages that choose a format already use these. Input: ISO dates first (what <input type="date"> sends), then the
month written as a word, as pages show it ("23 Mar 2027"); not the locale's month-first "06/01/2026", which a site
writing the day first would have read as another day without a word.
"""
DATE_FORMAT = "d M Y"
DATETIME_FORMAT = "d M Y H:i"
SHORT_DATE_FORMAT = "d M Y"
SHORT_DATETIME_FORMAT = "d M Y H:i"
DATE_INPUT_FORMATS = [
    "%Y-%m-%d", "%d %b %Y", "%d %b, %Y", "%d %B %Y", "%d %B, %Y", "%b %d %Y", "%b %d, %Y", "%B %d %Y", "%B %d, %Y",
]
DATETIME_INPUT_FORMATS = ["%Y-%m-%d %H:%M:%S", "%Y-%m-%d %H:%M:%S.%f", "%Y-%m-%d %H:%M", "%d %b %Y %H:%M"]

#: What a date or a date and time that could not be read is told, in place of Django's "Enter a valid date." (set on
#: the form fields in ``admin_site.ObservatoryAdminConfig.ready``): the forms accept the formats above, and a person
#: typing a date where the browser gives no date picker needs to know them.
DATE_INVALID = "Enter the date as YYYY-MM-DD (2027-03-23) or as 23 Mar 2027."
DATETIME_INVALID = "Enter the date and time as YYYY-MM-DD HH:MM (2027-03-23 21:30)."
