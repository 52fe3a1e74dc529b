"""How to leave a recoat's removal or reinstall if the work stops part way is no longer a numbered step to tick (after
the lockout, whether the work stopped or not) but a standing note of those orders (workorders.selectors
.standing_notes), shown on their page and paper.

Stored orders: a removal or reinstall order still draft or issued loses the step, since nobody has ticked anything on
it yet (ticks are recorded only while the work is underway); the audit trail records the change. An order underway
keeps it: its ticks are kept by step position, and taking a step out would move every later tick onto another line.
Finished, countersigned and withdrawn orders keep their record as it was. The step is matched by its exact words,
written out here as they stood, so this does not change with the code. The backward step leaves the orders as they are.
"""
from django.db import migrations
from django.utils import timezone

_STEP = (
    "If the work stops before this order is finished (at the end of a shift, or over the crew's days off), "
    "leave it safe first: the mirror set down and secured in its crate or in its cell on the lowered lifting "
    "table, never left hanging; both axes pinned; the locks and tags kept on, handed over from person to person "
    "or onto the site's long-term locks as its lockout procedure says for work over several shifts."
)


def step_to_note(apps, schema_editor):
    WorkOrder = apps.get_model("workorders", "WorkOrder")
    HistoricalWorkOrder = apps.get_model("workorders", "HistoricalWorkOrder")
    fields = [field.attname for field in WorkOrder._meta.concrete_fields]
    for order in WorkOrder.objects.filter(recoat_phase__in=("removal", "reinstall"), state__in=("draft", "issued")):
        lines = order.steps.splitlines()
        kept = [line for line in lines if line.strip() != _STEP]
        if len(kept) == len(lines):
            continue
        order.steps = "\n".join(kept)
        order.save(update_fields=["steps"])
        HistoricalWorkOrder.objects.create(
            **{name: getattr(order, name) for name in fields}, history_date=timezone.now(), history_type="~",
            history_change_reason="step on stopping part way made a standing note",
        )


class Migration(migrations.Migration):

    dependencies = [
        ("workorders", "0012_finish_crew_isolation_shortfall"),
    ]

    operations = [migrations.RunPython(step_to_note, migrations.RunPython.noop)]
