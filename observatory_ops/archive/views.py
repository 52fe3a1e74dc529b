from django.http import Http404
from django.shortcuts import get_object_or_404, render
from django.utils import timezone

from observatory_ops.access.decorators import requires
from observatory_ops.access.roles import VIEWER, has_role
from observatory_ops.exports import csv_response

from .history import audited_model, changes


@requires(VIEWER)
def history(request, label, pk):
    """Every change to one audited object; ``?export=csv`` downloads it, times as ISO 8601 in UTC. A model that
    names a higher role in ``history_read_by`` (API tokens: administrators) shows its history to that role only; to
    anyone else it is as if none were kept."""
    model = audited_model(label)
    if model is None or not has_role(request.user, getattr(model, "history_read_by", VIEWER)):
        raise Http404("no history is kept for that kind of record")
    instance = get_object_or_404(model, pk=pk)
    entries = changes(instance)
    if request.GET.get("export") == "csv":
        rows = (
            (c.when.isoformat(timespec="seconds"), c.who, f"{c.part}: {c.kind}" if c.part else c.kind, c.reason, name,
             before, after)
            for c in entries
            for name, before, after in (c.fields_exported or [("", "", "")])
        )
        # Machine-readable: ISO 8601 in UTC, with the offset written (+00:00), for times in before and after too.
        header = ("when_utc", "who", "what", "reason", "field", "before", "after")
        # Named by the kind of record in plain words and the day (UTC's, as its times) it was made: the app's label
        # read "history-registry.subsystem-41.csv" (a handover review).
        made_on = timezone.now().date()
        return csv_response(f"history-{model._meta.model_name}-{pk}-{made_on:%Y-%m-%d}.csv", header, rows)
    return render(
        request, "archive/history.html",
        {"instance": instance, "entries": entries, "label": label, "verbose": model._meta.verbose_name},
    )
