"""Writes of the logbook: nightly usage imports, readings and service records (append-only).

Each write ends by recomputing the due states of the site it touched, so pages show the new state.
"""
from __future__ import annotations

import copy
import datetime as dt
import hashlib
import json
from collections.abc import Callable
from dataclasses import dataclass, field

from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction
from django.db.models import Q
from django.template.defaultfilters import pluralize
from django.utils import timezone
from simple_history.utils import bulk_create_with_history, bulk_update_with_history

from observatory_ops.calc.night_of import night_of
from observatory_ops.calc.triggers import OVERDUE
from observatory_ops.planning.models import PlanStatus, ServicePlan
from observatory_ops.planning.selectors import nights_before_unknown_starts_note
from observatory_ops.planning.services import site_recompute, site_today
from observatory_ops.registry.models import Site, Subsystem, Telescope
from observatory_ops.registry.services import retired_work_problem

from . import nights_csv
from .models import NightUsage, Reading, ServiceRecord
from .quantities import QUANTITIES, value_problem
from .selectors import counters_out_of_line, nights_longer_than_the_night, nights_while_out

#: The columns that say which night a record is (the site's, or one telescope's), not what was used in it.
_KEY_COLUMNS = ("night", "telescope")
_USAGE_FIELDS = [c for c in nights_csv.COLUMNS if c not in _KEY_COLUMNS]
#: What a new night stores for a column its record leaves out: by whether it is a telescope's night (True: None for a
#: figure left to the site's row of that night, ``nights_csv.Column.blank_of``) or the whole site's (False).
_BLANKS = {
    own: {c.name: c.blank_of(own) for c in nights_csv.COLUMN_SPECS if not c.required and c.name not in _KEY_COLUMNS}
    for own in (False, True)
}
#: A stored night: (telescope id, or None for the whole site's night; the night).
NightKey = tuple[int | None, dt.date]


@dataclass(frozen=True)
class NightChange:
    """One figure of a stored night that an import changes (or would change, awaiting confirmation).
    ``telescope`` is the name of the telescope whose night it is, "" for the whole site's night."""

    night: dt.date
    column: str
    old: object
    new: object
    telescope: str = ""

    @property
    def whose(self) -> str:
        return self.telescope or WHOLE_SITE

    @property
    def old_text(self) -> str:
        return self._text(self.old)

    @property
    def new_text(self) -> str:
        return self._text(self.new)

    def _text(self, value: object) -> str:
        if value is None and self.telescope and self.column in nights_csv.FROM_SITE:
            return FIGURE_FROM_SITE
        return nights_csv.cell(value) or "empty"


#: How pages and messages name a night that is no one telescope's.
WHOLE_SITE = "whole site"
#: How pages show a figure a telescope's night leaves to the site's row of that night (stored as None).
FIGURE_FROM_SITE = "site's"


def left_out_shown(night: NightUsage) -> str:
    """How pages show a counter or PM10 ``night`` leaves out (stored None): the site's figure on a telescope's row,
    0 on a telescope's row of 0 open hours (``planning.services.UsageLog._filled``), "–" (not measured) elsewhere."""
    if not night.telescope_id:
        return "–"
    return FIGURE_FROM_SITE if night.open_hours else "0"


def night_named(night: dt.date | str, telescope: str) -> str:
    """"2024-01-05" for the whole site's night, "2024-01-05 (North)" for a telescope's."""
    return f"{night} ({telescope})" if telescope else str(night)


@dataclass
class ImportReport:
    created: int = 0
    updated: int = 0
    unchanged: int = 0
    errors: list[nights_csv.Problem] = field(default_factory=list)  # (line or index, reason), with .field
    skipped: list[nights_csv.Problem] = field(default_factory=list)
    stored: bool = False
    #: The night of each stored night updated (the site's, or a telescope's: ``changes`` names which), in order.
    updated_nights: list[dt.date] = field(default_factory=list)
    file_problem: str = ""  # a sentence when the whole file or body is refused (then no row was read)
    #: Every figure of a stored night that the import changed, or would change when ``confirm_token`` is set.
    changes: list[NightChange] = field(default_factory=list)
    #: Set when nothing was stored because the file changes stored nights: the token that confirms these changes.
    confirm_token: str = ""
    #: A token was given but the changes are not those it confirmed (the file or the stored nights differ).
    confirmed_other: bool = False
    #: The site and the nights created or updated, for ``uncounted_note``.
    stored_on: tuple[Site, list[NightUsage]] | None = None
    #: The site and the nights the import creates or updates, or would once its changes are confirmed, for
    #: ``longer_than_the_night``: a slip is best caught before it is stored.
    checked_on: tuple[Site, list[NightUsage]] | None = None
    #: The counts of each telescope's nights in the file or request (its name; "" for the whole site's), in order of
    #: first appearance: {"created": .., "updated": .., "unchanged": ..}, as the API answers them.
    by_telescope: dict[str, dict[str, int]] = field(default_factory=dict)
    #: Name whose nights were stored even when all are the whole site's: the site has more than one telescope.
    several_telescopes: bool = False
    #: The telescopes unknown at the site whose rows are refused (or skipped) in one sentence, ``telescopes_unknown``,
    #: rather than on each row's line (``_telescopes_unknown``).
    said_once: frozenset[str] = frozenset()
    telescopes_unknown: str = ""

    @property
    def uncounted_note(self) -> str:
        """Why some stored nights move no counter: they are before the start of plans whose last service is
        unknown (``planning.selectors.nights_before_unknown_starts_note``). Worked out when read (the import page
        and command read it in ``summary``; the API's ingest does not, so it costs the ingest nothing)."""
        if not self.stored_on:
            return ""
        site, nights = self.stored_on
        return nights_before_unknown_starts_note(site, [(n.telescope_id, n.night) for n in nights])

    @property
    def longer_than_the_night(self) -> list[str]:
        """The nights stored, or to be stored once confirmed, whose open hours exceed the night at the site
        (``selectors.nights_longer_than_the_night``): stored as sent, and named so a slip (20 for 2.0) is corrected
        before confirming, or by sending the night again."""
        return nights_longer_than_the_night(*self.checked_on) if self.checked_on else []

    @property
    def while_out(self) -> list[str]:
        """The nights stored, or to be stored once confirmed, with hours open while their telescope (or the site) is
        closed or retired (``selectors.nights_while_out``): stored as sent, and named."""
        return nights_while_out(*self.checked_on) if self.checked_on else []

    @property
    def out_of_line(self) -> list[str]:
        """The nights stored, or to be stored once confirmed, with a counter far above its log's usual rate per open
        hour, or a dust level far above its usual (``selectors.counters_out_of_line``): stored as sent, and named."""
        return counters_out_of_line(*self.checked_on) if self.checked_on else []

    @property
    def to_check(self) -> list[str]:
        """Every night the import names to check: longer than the night, open while out of service, or a counter out
        of line."""
        return [*self.longer_than_the_night, *self.while_out, *self.out_of_line]

    @property
    def summary(self) -> str:
        if self.file_problem:
            return f"{self.file_problem}. Nothing was stored."
        if self.errors:
            return f"{_rows(self.errors)}; nothing was stored.{self._said_once_sentence}"
        if self.confirm_token:
            nights = len({(change.night, change.telescope) for change in self.changes})
            text = (
                "These changes are not the ones confirmed (the file or the stored nights differ): check them again"
                if self.confirmed_other else "Check the changes below and confirm them"
            )
            text = (
                f"{text}. The file would change {nights} stored night{pluralize(nights)} "
                f"({self.created} new, {self.unchanged} unchanged); nothing was stored yet"
            )
            if long := self.longer_than_the_night:
                text += (f". Check {len(long)} night{pluralize(len(long))} longer than the night before storing "
                         f"(correct the file and import it again): {'; '.join(long)}")
            if out := self.while_out:
                text += (f". Check {len(out)} night{pluralize(len(out))} open while out of service: "
                         f"{'; '.join(out)}")
            if high := self.out_of_line:
                text += f". Check {len(high)} night{pluralize(len(high))} with a figure out of line: {'; '.join(high)}"
            return f"{text}."
        text = (f"{self.created} new{self._whose('created')}, {self.updated} updated{self._whose('updated')}, "
                f"{self.unchanged} unchanged{self._whose('unchanged')}")
        if self.skipped:
            text += f"; {_rows(self.skipped)} skipped"
        if not (self.created or self.updated):
            text += "; nothing changed"
        if long := self.longer_than_the_night:
            text += (f". Check {len(long)} night{pluralize(len(long))} longer than the night, stored as sent (send a "
                     f"night again to correct it): {'; '.join(long)}")
        if out := self.while_out:
            text += (f". Check {len(out)} night{pluralize(len(out))} open while out of service, stored as sent: "
                     f"{'; '.join(out)}")
        if high := self.out_of_line:
            text += (f". Check {len(high)} night{pluralize(len(high))} with a figure out of line, stored as sent: "
                     f"{'; '.join(high)}")
        return f"{text}.{self._said_once_sentence} {self.uncounted_note}".strip()

    @property
    def _said_once_sentence(self) -> str:
        return f" {self.telescopes_unknown}." if self.telescopes_unknown else ""

    def _whose(self, count: str) -> str:
        """" (whole site: 2, R40: 28)": whose nights ``count`` ("created", "updated", "unchanged") counts, when any of
        them is a telescope's or the site has several (a whole site's night stored by mistake is then seen)."""
        stored = [(name, tally[count]) for name, tally in self.by_telescope.items() if tally[count]]
        if not stored or not (self.several_telescopes or any(name for name, _ in stored)):
            return ""
        return f" ({', '.join(f'{name or WHOLE_SITE}: {number}' for name, number in stored)})"

    @property
    def refused_rows(self) -> list[tuple[int | None, str]]:
        """(line or index, every problem of that row) for each refused row, in order; not the problems said once
        (``said_once``)."""
        return [] if self.file_problem else _by_position(self._on_their_lines(self.errors))

    @property
    def skipped_rows(self) -> list[tuple[int | None, str]]:
        return _by_position(self._on_their_lines(self.skipped))

    def _on_their_lines(self, problems: list[nights_csv.Problem]) -> list[nights_csv.Problem]:
        return [p for p in problems if p.telescope_unknown not in self.said_once]


def _rows(problems: list[nights_csv.Problem]) -> str:
    """"1 bad row", "3 bad rows": the rows the problems are on."""
    count = len(_by_position(problems))
    return f"{count:,} bad row{pluralize(count)}"


def _by_position(problems: list[nights_csv.Problem]) -> list[tuple[int | None, str]]:
    rows: dict[int | None, list[str]] = {}
    for position, reason in problems:
        rows.setdefault(position, []).append(reason)
    return [(position, "; ".join(reasons)) for position, reasons in rows.items()]


def nights_import(
    site: Site,
    data: bytes,
    skip_bad: bool = False,
    source: str = NightUsage.Source.IMPORT,
    progress: Callable[[int, int], None] | None = None,
    by=None,
    confirmed: str | None = None,
) -> ImportReport:
    """Import a nights CSV (``nights_csv`` format) for one site: all or nothing, and idempotent.

    Every problem of every bad row is reported with its line number; a file that is not a nights CSV
    at all is refused as a whole (``ImportReport.file_problem``). Unless ``skip_bad``, one bad row means
    nothing is stored. A row names the whole site's night, or one telescope's (``telescope``, a name of the
    site's telescopes; another name is a bad row). A night already stored (the site's, or that telescope's)
    keeps the figures of the columns the file leaves out; if the file's figures for it are the stored ones it
    is left untouched, otherwise it is updated and reported with its telescope (``ImportReport.changes``).
    ``progress(done, total)`` is called as rows are checked. ``by`` is the person the audit trail names (None
    for the command line).

    ``confirmed`` None stores changes to stored nights at once (the command line). Otherwise (the upload
    page, "" before any confirmation) a file that would change stored nights is stored only when
    ``confirmed`` is the token of exactly these changes of this file; if not, nothing is stored and the report
    lists the changes with their ``confirm_token``. A file that changes no stored night needs no token.
    """
    report = ImportReport()
    try:
        text = nights_csv.decode(data)
    except nights_csv.FileError as exc:
        return _refused_file(report, [nights_csv.Problem(None, str(exc))])
    telescopes = _site_telescopes(site)
    parsed = nights_csv.parse(text, latest_night=latest_night(site), telescopes=tuple(telescopes))
    if parsed.whole_problem:
        return _refused_file(report, parsed.errors)
    refused = not (skip_bad and parsed.rows)
    report.said_once, report.telescopes_unknown = _telescopes_unknown(site, parsed.errors, list(telescopes), refused)
    if parsed.errors and refused:
        report.errors = parsed.errors
        return report
    report.skipped = parsed.errors
    approve = None
    if confirmed is not None:
        def approve(changes: list[NightChange]) -> bool:
            token = _confirm_token(data, changes)
            if token == confirmed:
                return True
            report.confirm_token, report.confirmed_other = token, bool(confirmed)
            return False
    report.several_telescopes = len(telescopes) > 1
    _nights_store(site, _resolved(parsed, telescopes), source, report, progress, by, approve=approve)
    return report


def other_site_named(site: Site, file_name: str) -> Site | None:
    """The other site of this installation whose log the file's name says the file is: the name the log's download
    gives it (``nights_csv.slug_named``) with the slug of a site other than ``site``. None for a name that names no
    site, or ``site`` itself. The upload page asks before importing such a file (``views.nights_import``)."""
    slug = nights_csv.slug_named(file_name)
    if slug is None or slug == site.slug:
        return None
    return Site.objects.filter(slug=slug).first()


def _telescopes_unknown(
    site: Site, problems: list[nights_csv.Problem], telescopes: list[str], refused: bool
) -> tuple[frozenset[str], str]:
    """The names of telescopes unknown at ``site`` that rows of a file give, to be said once for all their rows, and
    the sentence that says it (refused, or skipped when not ``refused``); ``telescopes``: the site's telescopes.

    Said once: a name another site of this installation has a telescope of (that site's log imported here: a
    bad-input review's file of another site refused every row on its own line, up to 50 of them, each advising to
    leave the telescope empty, which would make its night the whole site's), and any name given on several rows.
    A name of no site on one row (a slip: "Nort") stays on its row's line with the rest of that row's problems.
    """
    lines: dict[str, list[int]] = {}
    for problem in problems:
        if problem.telescope_unknown is not None:
            lines.setdefault(problem.telescope_unknown, []).append(problem.position)
    # Matched as this site's names are (``nights_csv._telescope``), case aside: "r40" rows of another site's R40.
    written = {name.casefold(): name for name in lines}
    owners: dict[str, list[str]] = {}
    others = Telescope.objects.exclude(site=site).order_by("site__name") if written else Telescope.objects.none()
    for name, owner in others.values_list("name", "site__name"):
        if name.casefold() in written:
            owners.setdefault(written[name.casefold()], []).append(owner)
    said = {name: at for name, at in lines.items() if len(at) > 1 or name in owners}
    if not said:
        return frozenset(), ""
    rows = sorted(line for at in said.values() for line in at)
    where = (f"line {rows[0]}" if len(rows) == 1 else f"lines {rows[0]} to {rows[-1]}"
             if rows[-1] - rows[0] == len(rows) - 1 else f"between lines {rows[0]} and {rows[-1]}")
    names = list(said)
    whose = {name: _listed([f"{owner}'s" for owner in owners[name]]) if name in owners
             else "registered at no site here" for name in names}
    if len(set(whose.values())) == 1:  # all of one site (or of none)
        belong = f"{_listed(names)} {'is' if len(names) == 1 else 'are'} {whose[names[0]]}"
    else:
        belong = "; ".join(f"{name} is {at}" for name, at in whose.items())
    here = (f"{site.name}'s telescope{pluralize(telescopes)} {'is' if len(telescopes) == 1 else 'are'} "
            f"{_listed(telescopes)}" if telescopes else f"{site.name} has no telescope registered")
    to_do = (f"write in the file's telescope column which of {site.name}'s telescopes each row is" if telescopes
             else f"register the telescopes at {site.name} first")
    return frozenset(said), (
        f"The file's {len(rows):,} row{pluralize(rows)} of telescope{pluralize(names)} {_listed(names)} ({where}) "
        f"{'are' if len(rows) > 1 else 'is'} {'refused' if refused else 'skipped'}: {belong}, and {here}. To import "
        f"{'them' if len(rows) > 1 else 'it'} here, {to_do}, and import the file again"
    )


def _listed(names: list[str]) -> str:
    """"R40", "R40 and R60", "R40, R60 and R80"."""
    return " and ".join(filter(None, [", ".join(names[:-1]), names[-1]]))


def _site_telescopes(site: Site) -> dict[str, Telescope]:
    """The site's telescopes by name: the names a record may give as its ``telescope``."""
    return {telescope.name: telescope for telescope in Telescope.objects.filter(site=site).order_by("name")}


def _resolved(parsed: nights_csv.ParsedNights, telescopes: dict[str, Telescope]) -> list[dict]:
    """The good rows' values, each ``telescope`` (a name as registered, checked by the parser) turned into the
    telescope, or None for the whole site's night."""
    return [values | {"telescope": telescopes.get(values.get("telescope"))} for _, values in parsed.rows]


def _confirm_token(data: bytes, changes: list[NightChange]) -> str:
    """The token that confirms these changes by this file: what was shown is what is stored."""
    shown = [[c.night.isoformat(), c.telescope, c.column, repr(c.old), repr(c.new)] for c in changes]
    return hashlib.sha256(data + json.dumps(shown).encode()).hexdigest()


def _refused_file(report: ImportReport, problems: list[nights_csv.Problem]) -> ImportReport:
    report.errors = problems
    report.file_problem = f"This file is not a nights CSV: {problems[0].reason}"
    return report


def latest_night(site: Site, now: dt.datetime | None = None) -> dt.date:
    """The newest night that can be logged now: the one the present moment belongs to (``calc.night_of``:
    a night is dated by the local date of its evening and runs from local noon to noon). Before local noon
    that is last night, so a night dated today, which has not begun, is refused: a common slip of control
    software that dates a night by its morning."""
    return night_of(now or timezone.now(), site.time_zone)


def night_stored_token(site: Site, night: dt.date, telescope_name: str) -> str:
    """What is stored for one night of ``site`` (the whole site's, ``telescope_name`` "", or that telescope's), as a
    short token: "2019-01-05|R40|<sha256 of its usage figures>", "...|none" when nothing is stored. A page that
    showed the night carries it, so saving learns whether the night was changed, or logged, since the page was made."""
    whose = {"telescope__name": telescope_name} if telescope_name else {"telescope__isnull": True}
    figures = NightUsage.objects.filter(site=site, night=night, **whose).values_list(*_USAGE_FIELDS).first()
    if figures is None:
        return f"{night}|{telescope_name}|none"
    shown = json.dumps([nights_csv.cell(figure) for figure in figures])
    return f"{night}|{telescope_name}|{hashlib.sha256(shown.encode()).hexdigest()[:16]}"


def nights_ingest(
    site: Site, records: list[dict], source: str = NightUsage.Source.API, by=None, reason: str = "",
    approve: Callable[[list[NightChange]], bool] | None = None,
) -> ImportReport:
    """Store nights sent by control software as JSON objects (keys: the CSV column names) for one site.

    The same rules as the CSV import (``nights_csv.ParsedNights.add``, which checks each record for both
    ``nights_csv.parse`` and ``nights_csv.parse_objects``); every problem of every bad object is
    reported with its list index and field (``Problem.field``), and one bad object means nothing is
    stored. An object is the whole site's night, or one telescope's (``telescope``: the name of one of the
    site's telescopes). Idempotent per site, telescope and night: a night sent again with the same figures
    changes nothing, with other figures it is updated; a key left out keeps the stored figure. Raises
    ValueError when ``records`` is not a list. ``approve(changes)``, when given, is asked before stored nights are
    changed (``_nights_store``): False stores nothing.
    """
    report = ImportReport()
    telescopes = _site_telescopes(site)
    parsed = nights_csv.parse_objects(records, latest_night=latest_night(site), telescopes=tuple(telescopes))
    if parsed.errors:
        report.errors = parsed.errors
        whole = parsed.whole_problem or ""
        report.file_problem = whole[:1].upper() + whole[1:]
        return report
    report.several_telescopes = len(telescopes) > 1
    _nights_store(site, _resolved(parsed, telescopes), source, report, by=by, reason=reason, approve=approve)
    return report


def night_questions(site: Site, record: dict) -> list[str]:
    """What the nightly log's form asks about ``record`` before storing it: what the import names to check once stored
    (``ImportReport.to_check``: longer than the night, open while out of service, a figure far out of line), worked
    out on the night as it would be stored (``_nights_compare``), nothing written, less what the night as stored
    already said (asked, or stored by the API, before). [] when nothing is named, or when the record is refused (the
    form then says why). A forecast review typed 24 h open on a 14.5 h night and PM10
    1,999 µg/m³: both were stored and counted before they were questioned."""
    telescopes = _site_telescopes(site)
    parsed = nights_csv.parse_objects([record], latest_night=latest_night(site), telescopes=tuple(telescopes))
    if parsed.errors:
        return []
    rows = _resolved(parsed, telescopes)
    with transaction.atomic():  # the stored night read as the store reads it
        stored = _stored_nights(site, {_key(v) for v in rows})
        as_stored = [copy.copy(night) for night in stored.values()]  # the comparison sets the form's figures on them
        new, changed, _, _ = _nights_compare(site, rows, stored, NightUsage.Source.FORM, None)
    after, before = ImportReport(), ImportReport()
    after.checked_on, before.checked_on = (site, new + changed), (site, as_stored)
    # What the stored night already said is not asked again: a diff review corrected the rain of a night whose PM10
    # had been confirmed, and was asked about the PM10 it had not typed.
    said = set(before.to_check) if as_stored else set()
    return [question for question in after.to_check if question not in said]


def _key(values: dict) -> NightKey:
    telescope = values["telescope"]
    return (telescope.pk if telescope else None, values["night"])


def _stored_nights(site: Site, keys: set[NightKey]) -> dict[NightKey, NightUsage]:
    """The stored nights of ``keys``, locked until the transaction ends."""
    owners = {telescope_id for telescope_id, _ in keys}
    whose = Q(telescope__in=owners - {None})
    if None in owners:
        whose |= Q(telescope__isnull=True)
    stored = NightUsage.objects.select_for_update().filter(whose, site=site, night__in={night for _, night in keys})
    return {key: u for u in stored if (key := (u.telescope_id, u.night)) in keys}


def _nights_store(
    site: Site,
    rows: list[dict],
    source: str,
    report: ImportReport,
    progress: Callable[[int, int], None] | None = None,
    by=None,
    reason: str = "",
    approve: Callable[[list[NightChange]], bool] | None = None,
) -> None:
    """Create new nights, update changed ones and count the rest, in one transaction; recompute on change.

    ``approve(changes)``, when given, is asked inside the transaction (the stored nights locked) before
    any stored night is changed; False stores nothing, not even the new nights.
    Two writers sending the same new night at once both find it absent and one insert fails on the
    unique constraint of the site's (or the telescope's) night; that writer starts again once, and then finds
    the night stored.
    """
    keys = {_key(values) for values in rows}
    for attempt in range(2):
        try:
            with transaction.atomic():
                new, changed, unchanged, changes = _nights_compare(
                    site, rows, _stored_nights(site, keys), source, progress
                )
                stored = not (changes and approve and not approve(changes))
                if stored:
                    _nights_write(new, changed, changes, by, reason)
                    if new or changed:
                        site_recompute(site)
            break
        except IntegrityError:
            if attempt:
                raise
    report.created, report.updated, report.unchanged = len(new), len(changed), unchanged
    report.changes, report.stored = changes, stored
    report.by_telescope = _counts_by_telescope(rows, new, changed)
    report.checked_on = (site, new + changed)
    if stored:
        report.updated_nights = sorted(u.night for u in changed)
        report.stored_on = (site, new + changed)


def _counts_by_telescope(
    rows: list[dict], new: list[NightUsage], changed: list[NightUsage]
) -> dict[str, dict[str, int]]:
    """Created, updated and unchanged nights of each telescope ``rows`` name ("" for the whole site's)."""
    names = {None: ""} | {t.pk: t.name for values in rows if (t := values["telescope"])}
    counts: dict[str, dict[str, int]] = {}
    for values in rows:  # every night counted unchanged, then moved to its count below
        whose = names[_key(values)[0]]
        counts.setdefault(whose, {"created": 0, "updated": 0, "unchanged": 0})["unchanged"] += 1
    for count, nights in (("created", new), ("updated", changed)):
        for night in nights:
            tally = counts[names[night.telescope_id]]
            tally[count] += 1
            tally["unchanged"] -= 1
    return counts


def _nights_compare(
    site: Site,
    rows: list[dict],
    existing: dict[NightKey, NightUsage],
    source: str,
    progress: Callable[[int, int], None] | None,
) -> tuple[list[NightUsage], list[NightUsage], int, list[NightChange]]:
    """The new nights, the stored nights with the file's figures set (not saved), the count of the others,
    and every figure changed. Each row holds the columns its record gave and its telescope (None: the whole
    site's night): a new night takes the blank value of every other column (a telescope's: None for a figure the
    site's row gives, ``_BLANKS``), a stored night keeps its figures for them and counts as changed only when a
    given one differs."""
    new, changed, unchanged, changes = [], [], 0, []
    for done, values in enumerate(rows, start=1):
        current = existing.get(_key(values))
        if current is None:
            new.append(NightUsage(site=site, source=source, **(_BLANKS[values["telescope"] is not None] | values)))
        else:
            differ = [f for f in _USAGE_FIELDS if f in values and getattr(current, f) != values[f]]
            whose = values["telescope"].name if values["telescope"] else ""
            changes += [NightChange(current.night, f, getattr(current, f), values[f], whose) for f in differ]
            for f in differ:
                setattr(current, f, values[f])
            if differ:
                current.source = source
                current.recorded_at = timezone.now()  # bulk_update skips auto_now
                changed.append(current)
            else:
                unchanged += 1
        if progress and (done % 500 == 0 or done == len(rows)):
            progress(done, len(rows))
    return new, changed, unchanged, changes


def _nights_write(
    new: list[NightUsage], changed: list[NightUsage], changes: list[NightChange], by, reason: str
) -> None:
    # The *_with_history forms also write the audit trail (django-simple-history skips plain bulk writes).
    bulk_create_with_history(new, NightUsage, batch_size=500, default_user=by, default_change_reason=reason)
    written = {change.column for change in changes}
    bulk_update_with_history(
        changed, NightUsage, [f for f in _USAGE_FIELDS if f in written] + ["source", "recorded_at"], batch_size=500,
        default_user=by, default_change_reason=reason,
    )


def nights_remove(nights, by, reason: str = "") -> dict[Site, int]:
    """Delete nights stored by mistake (a telescope's row sent for the wrong telescope, a test telescope's nights)
    and recompute each site they were at, in one transaction; returns the count removed at each site.

    The history keeps each removed night with who removed it and why (the archive shows it). A telescope whose wrong
    row is removed counts the site's row of that night again (``planning.services.UsageLog``); a night to be moved to
    another telescope is removed here and sent again under the right one.
    """
    removed: dict[Site, int] = {}
    with transaction.atomic():
        locked = NightUsage.objects.select_for_update(of=("self",)).filter(pk__in=[n.pk for n in nights])
        for night in locked.select_related("site"):
            night._history_user = by
            night._change_reason = reason
            night.delete()
            removed[night.site] = removed.get(night.site, 0) + 1
        for site in removed:
            site_recompute(site)
    return removed


def reading_log(
    subsystem: Subsystem, quantity: str, value: float, taken_at: dt.datetime, by, note: str = ""
) -> Reading:
    """Append a reading and refresh the due states it may change. One taken on a retired subsystem after its retire
    day is refused (``registry.services.retired_work_problem``).

    A reflectance reading of a mirror subsystem is also filed among the mirror's measurements, in the same
    transaction, so the mirror page's decline fit sees it (``mirrors.services.measurement_from_reading``).
    """
    from observatory_ops.mirrors.services import measurement_from_reading  # mirrors builds on the logbook

    if quantity not in QUANTITIES:
        raise ValidationError(f"unknown quantity {quantity!r}")
    problem = value_problem(quantity, value)
    if problem:
        raise ValidationError(problem)
    if taken_at > timezone.now() + dt.timedelta(minutes=5):
        raise ValidationError("a reading cannot be taken in the future")
    site = subsystem.telescope.site
    day = taken_at.astimezone(site.zone).date()
    problem = date_problem(site, day, "reading date") or retired_work_problem(subsystem, day, "A reading")
    if problem:
        raise ValidationError(problem)
    with transaction.atomic():
        reading = Reading.objects.create(
            subsystem=subsystem, quantity=quantity, unit=QUANTITIES[quantity][1], value=value,
            taken_at=taken_at, taken_by=by, note=note,
        )
        measurement_from_reading(reading)
        site_recompute(site)
    return reading


def withdrawn_mark(records, by, reason: str) -> None:
    """Mark records (readings, mirror measurements) withdrawn now by ``by`` for ``reason``, each through ``save`` so
    the history keeps who did it; the one writing of the three ``withdrawn_*`` fields."""
    now = timezone.now()
    for record in records:
        record.withdrawn_at, record.withdrawn_by, record.withdrawn_reason = now, by, reason[:200]
        record._history_user = by
        record.save(update_fields=["withdrawn_at", "withdrawn_by", "withdrawn_reason"])


def reading_withdraw(reading: Reading, by, reason: str) -> Reading:
    """Withdraw a reading logged in error (a wrong unit, the wrong subsystem): it stays on the record, marked with who
    withdrew it and why, and no plan's trend counts it from now on (the site is recomputed). Nothing is deleted.
    A reflectance reading filed among a mirror's measurements withdraws that measurement with it (its decline fit
    leaves it out): the two are one measurement (``mirrors.services.measurement_withdraw``)."""
    reason = reason.strip()
    if not reason:
        raise ValidationError("say why the reading is withdrawn (for example: typed in milliseconds, not seconds)")
    with transaction.atomic():
        reading = Reading.objects.select_for_update().select_related("subsystem__telescope__site").get(pk=reading.pk)
        if reading.withdrawn_at is not None:
            raise ValidationError(f"this reading was already withdrawn on {reading.withdrawn_at:%d %b %Y}")
        withdrawn_mark(
            [reading, *([reading.mirror_measurement] if hasattr(reading, "mirror_measurement") else [])], by, reason
        )
        site_recompute(reading.subsystem.telescope.site)
    return reading


def date_problem(site: Site, day: dt.date, what: str) -> str | None:
    """Why ``day`` cannot be the local date of ``what`` ("service date", "reading date") at ``site``; None
    when it can: not in the future, and no further back than a night may be (``nights_csv.MAX_YEARS_BACK``)."""
    today = site_today(site)
    if day > today:
        return f"the {what} cannot be in the future"
    earliest = nights_csv.earliest_accepted(today)
    if day < earliest:
        return f"{what} {day} is more than {nights_csv.MAX_YEARS_BACK} years ago; the earliest accepted is {earliest}"
    return None


def service_date_problem(site: Site, performed_on: dt.date) -> str | None:
    """Why ``performed_on`` cannot be the date of service work at ``site``; None when it can."""
    return date_problem(site, performed_on, "service date")


@dataclass(frozen=True)
class DueBefore:
    """What a service record keeps of its plan's due state before the record restarts it (``due_before``): the day
    its governing limit was passed when the work came after it (None otherwise), the due sentence, and whether the
    work was late, on time or due from the start (``ServiceRecord.timeliness``)."""

    limit_passed_on: dt.date | None = None
    due_when_logged: str = ""
    timeliness: str = ""

    def kept(self) -> dict:
        """The record's fields for it."""
        return {"limit_passed_on": self.limit_passed_on, "due_when_logged": self.due_when_logged,
                "timeliness": self.timeliness}


def due_before(plan: ServicePlan | None, performed_on: dt.date) -> DueBefore:
    """``plan``'s due state as the work done on ``performed_on`` answers it, read from the stored state before the
    record restarts it: late (with the day its governing limit was passed) when that day came before the work, due from
    the start for a plan whose last service is unknown (not late), on time otherwise. Nothing for ad hoc work or a plan
    with no state yet."""
    if plan is None:
        return DueBefore()
    status = PlanStatus.objects.filter(plan=plan).first()
    if status is None:  # a plan with no trigger, or not counted (inactive, its subsystem retired)
        return DueBefore(None, "", "no state")
    if status.last_service_unknown:
        return DueBefore(None, status.reason, "from start")
    if status.status == OVERDUE and status.forecast_date is not None and status.forecast_date < performed_on:
        return DueBefore(status.forecast_date, status.reason, "late")
    return DueBefore(None, status.reason, "on time")


def service_record_log(
    subsystem: Subsystem,
    plan: ServicePlan | None,
    performed_on: dt.date,
    by,
    summary: str,
    hours_spent: float | None = None,
    findings: str = "",
    performed_by=None,
    repaired_failure: bool = False,
) -> ServiceRecord:
    """Append a service record; a record for a plan restarts that plan's counting from ``performed_on``.
    ``hours_spent`` None: not known, so the record counts no maintenance hours. ``repaired_failure``: the work repaired
    a failure (the reliability page counts it as one). Work on a retired subsystem dated after its retire day is
    refused (``registry.services.retired_work_problem``); on or before it, it is its history entered late, and its
    plans, no longer counted, restart nothing."""
    site = subsystem.telescope.site
    problem = service_date_problem(site, performed_on) or retired_work_problem(subsystem, performed_on, "Service work")
    if problem:
        raise ValidationError(problem)
    record = ServiceRecord(
        subsystem=subsystem, plan=plan, performed_on=performed_on, performed_by=performed_by or by,
        hours_spent=hours_spent, summary=summary, findings=findings, created_by=by, repaired_failure=repaired_failure,
        **due_of_work(plan, performed_on).kept(),
    )
    record.full_clean()
    with transaction.atomic():
        record.save()
        site_recompute(site)
    return record


def due_of_work(plan: ServicePlan | None, performed_on: dt.date, record: ServiceRecord | None = None) -> DueBefore:
    """What work on ``plan`` done on ``performed_on`` answered, read before it is stored (``record``: the one a
    correction moving its date replaces). From the stored state (``due_before``) for work after the plan's newest
    service; for work dated before it, with the later services set aside (``_due_without``); for work before the
    plan's start with no service before it, due from the start: nothing is known before it (a diff review's service of
    June, before the plan's given last service of November, was judged against November's limit). The due sentence of
    work done before the site's today says on which day its figures were counted to (a diff review read "on time"
    beside "183 of 90 days")."""
    if plan is None:
        return DueBefore()
    standing = ServiceRecord.objects.filter(plan=plan, corrected_by__isnull=True, void=False)
    if record is not None:
        standing = standing.exclude(pk=record.pk)
    if performed_on < plan.counting_from and not standing.filter(performed_on__lt=performed_on).exists():
        return DueBefore(None, "", "from start")
    if record is not None or standing.filter(performed_on__gte=performed_on).exists():
        due = _due_without(plan, performed_on, record)
    else:
        due = due_before(plan, performed_on)
    today = site_today(plan.subsystem.telescope.site)
    if due.due_when_logged and performed_on < today:
        days = (today - performed_on).days
        due = DueBefore(due.limit_passed_on, f"Worked out on {today:%d %b %Y}, {days} day{'s' if days != 1 else ''} "
                        f"after the work, its figures counted to that day: {due.due_when_logged}", due.timeliness)
    return due


def _due_without(plan: ServicePlan | None, performed_on: dt.date, record: ServiceRecord | None = None) -> DueBefore:
    """``due_before`` for work on ``plan`` done on ``performed_on``, with the plan's services from ``performed_on`` on
    set aside (and ``record``, the one a correction replaces).

    The stored due state counts from the plan's newest service, so for work dated before it (a correction moving a
    record back, or a service entered late from a paper log: a diff review's record of March was called "on time"
    against November's limit) it cannot say what that work answered: that counts from the plan's last service before
    ``performed_on``. The state is worked out again with those records left out, inside a transaction rolled back at
    once: nothing of it is kept, neither the records left out nor the due states, which the caller recomputes."""
    if plan is None:
        return DueBefore()

    class SetAside(Exception):
        """Rolls the worked-out state back."""

    found = DueBefore()
    try:
        with transaction.atomic():
            # Counted as no service while the state is read (the recompute counts no withdrawn record).
            ServiceRecord.objects.filter(
                Q(plan=plan, performed_on__gte=performed_on) | (Q(pk=record.pk) if record else Q(pk__in=[]))
            ).update(void=True)
            site_recompute(plan.subsystem.telescope.site)
            found = due_before(plan, performed_on)
            raise SetAside
    except SetAside:
        pass
    return found


def service_record_correct(
    original: ServiceRecord, by, summary: str, *, reason: str, performed_on: dt.date | None = None,
    hours_spent: float | None = None, findings: str = "", void: bool = False,
) -> ServiceRecord:
    """Append a correction that replaces ``original`` (or withdraws it with ``void``); nothing is edited. ``reason``:
    what was wrong with it, required, kept on the correction with who made it and when (``created_by``,
    ``created_at``).

    A new date is held to the rules of a new record (``service_date_problem``, ``retired_work_problem``). The correction
    carries the original's work order: its hours stay in the order type's column of the reliability page, and the
    order's page and paper show its hours as corrected (``workorders.selectors.hours_corrected``). How late the work
    came (``limit_passed_on``) is worked out again for the corrected date, as if the original had not been logged
    (``_due_without``, one site recompute, only when the date changes): work moved before the limit was passed
    was on time, work moved past it came late. A withdrawal records no work, so it is late by nothing."""
    reason = " ".join(reason.split())
    if not reason:
        raise ValidationError("say why the record is corrected: a correction without a reason is not kept")
    if performed_on and performed_on != original.performed_on:
        problem = (service_date_problem(original.subsystem.telescope.site, performed_on)
                   or retired_work_problem(original.subsystem, performed_on, "Service work"))
        if problem:
            raise ValidationError(problem)
    with transaction.atomic():
        original = ServiceRecord.objects.select_for_update().get(pk=original.pk)
        if ServiceRecord.objects.filter(corrects=original).exists():
            raise ValidationError("this record has already been corrected; correct the newest record instead")
        performed_on = performed_on or original.performed_on
        correction = ServiceRecord(
            subsystem=original.subsystem, plan=original.plan, performed_on=performed_on,
            performed_by=original.performed_by,
            hours_spent=original.hours_spent if hours_spent is None else hours_spent,
            summary=summary, findings=findings, corrects=original, void=void, created_by=by,
            correction_reason=reason,
            repaired_failure=original.repaired_failure,
            **(DueBefore() if void else DueBefore(original.limit_passed_on, original.due_when_logged,
                                                   original.timeliness) if performed_on == original.performed_on
               else due_of_work(original.plan, performed_on, original)).kept(),
            work_order=original.work_order,
        )
        correction.full_clean()
        correction.save()
        site_recompute(original.subsystem.telescope.site)
    return correction
