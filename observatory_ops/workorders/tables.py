import django_filters
import django_tables2 as tables
from django import forms
from django.utils.html import format_html

from observatory_ops.archive.history import person
from observatory_ops.registry.models import Site

from .models import State, WorkOrder
from .selectors import work_done_on_of

#: Each cell carries its column's header as data-label: on a phone each row is a card of "label: value" lines
#: (site.css, ``.card-table``), the number and the state on its first line.
_LABELLED = {"td": {"data-label": lambda bound_column: bound_column.header}}


class WorkOrderTable(tables.Table):
    number = tables.Column(accessor="pk", verbose_name="Number", attrs=_LABELLED)
    state = tables.Column(attrs=_LABELLED)
    title = tables.Column(attrs=_LABELLED)
    # order-site: the column site.css leaves out on a tablet, for the list to fit without scrolling sideways.
    site = tables.Column(accessor="site__name", verbose_name="Site", attrs={
        "th": {"class": "order-site"}, "td": {**_LABELLED["td"], "class": "order-site"},
    })
    # An order over several telescopes has none of its own: its items name them (``selectors.work_orders_listed``
    # fetches them for the whole page at once). empty_values=(): rendered for those too.
    telescope = tables.Column(accessor="telescope__name", verbose_name="Telescope", empty_values=(), attrs=_LABELLED)
    planned_date = tables.Column(verbose_name="Planned", attrs=_LABELLED)
    priority = tables.Column(attrs=_LABELLED)
    assignee = tables.Column(attrs=_LABELLED)

    class Meta:
        model = WorkOrder
        fields = ()
        sequence = ("number", "state", "title", "site", "telescope", "planned_date", "priority", "assignee")
        order_by = ("-number",)
        attrs = {"class": "card-table"}

    def render_number(self, record):
        return format_html('<a class="nowrap" href="{}">{}</a>', record.get_absolute_url(), record.number)

    def render_telescope(self, record):
        if record.telescope_id:
            return record.telescope.name
        return ", ".join(sorted({item.subsystem.telescope.name for item in record.items.all()})) or "several"

    def render_assignee(self, record):
        return person(record.assignee)

    def render_state(self, record):
        return format_html('<span class="wo-state wo-{}">{}</span>', record.state, record.get_state_display())


#: The "Assigned" filter's choices: a technician's own orders, or those nobody has taken yet.
MINE, NOBODY = "me", "nobody"
#: The "State" filter's choices beyond one state: the work still to do (the list's default: a technician looking for
#: today's work saw finished and countersigned orders first), and every order (the default when "Done from" or "Done
#: to" is given).
OPEN, EVERY = "open", "all"
OPEN_STATES = (State.DRAFT, State.ISSUED, State.UNDERWAY)


class WorkOrderFilter(django_filters.FilterSet):
    site = django_filters.ModelChoiceFilter(queryset=Site.objects.all(), label="Site")
    state = django_filters.ChoiceFilter(
        choices=[(OPEN, "still to do (draft, issued, underway)"), *State.choices, (EVERY, "any state")],
        label="State", method="filter_state", empty_label=None,
    )
    order_type = django_filters.ChoiceFilter(choices=WorkOrder.Type.choices, label="Type")
    assigned = django_filters.ChoiceFilter(
        choices=[(MINE, "to me"), (NOBODY, "to nobody yet")], label="Assigned", method="filter_assigned",
    )
    title = django_filters.CharFilter(lookup_expr="icontains", label="Title contains")
    # The day the work was done (``selectors.work_done_on``): a month's finished work for a report (a manager's
    # review opened each order to find last month's).
    done_from = django_filters.DateFilter(label="Done from", method="filter_done",
                                          widget=forms.DateInput(attrs={"type": "date"}))
    done_to = django_filters.DateFilter(label="Done to", method="filter_done",
                                        widget=forms.DateInput(attrs={"type": "date"}))

    class Meta:
        model = WorkOrder
        fields = ["site", "state", "order_type", "assigned", "title", "done_from", "done_to"]

    def __init__(self, data=None, *args, **kwargs):
        if data is not None and not data.get("state"):
            data = data.copy()
            # Asked for the work done in a period, every state: "still to do" left a year's finished work out of the
            # list and its CSV (a handover review). A state the user chose is kept.
            data["state"] = EVERY if data.get("done_from") or data.get("done_to") else OPEN
        super().__init__(data, *args, **kwargs)

    def filter_state(self, queryset, name, value):
        if value == OPEN:
            return queryset.filter(state__in=OPEN_STATES)
        return queryset if value == EVERY else queryset.filter(state=value)

    def unapplied(self) -> str:
        """The filters that cannot be applied, each by its label with why, in one sentence: the list says it above
        its rows (which it leaves empty then) and the CSV refuses with it (a walk-through's impossible date left the
        list empty without a word)."""
        return "; ".join(f"{self.form.fields[name].label} {self.data.get(name)!r}: {' '.join(errors).rstrip('.')}"
                         for name, errors in self.errors.items())

    def filter_done(self, queryset, name, value):
        if "done_on" not in queryset.query.annotations:
            queryset = queryset.annotate(done_on=work_done_on_of("pk"))
        return queryset.filter(**{"done_on__gte" if name == "done_from" else "done_on__lte": value})

    def filter_assigned(self, queryset, name, value):
        if value == MINE:
            return queryset.filter(assignee=self.request.user)
        return queryset.filter(assignee__isnull=True)
