"""The output folder of a batch, written so that an interrupted batch can resume.

    DIR/batch.json        the settings every person is fitted with, and their fingerprint
    DIR/people/<id>.json  one file per finished person (models.personfit.PersonOutcome),
                          written atomically the moment the person is done
    DIR/people.jsonl      one fit document per line (`lagwise fit --json`) plus "person"
    DIR/summary.json      the across-people summary (models.across)
    DIR/estimates.csv     person, parameter, estimate, se, lower, upper

A rerun into the same folder reuses every person file whose fingerprint (settings and that
person's data) matches and fits the others again; a folder made with other settings is
refused rather than mixed. Every file is written with models.atomic, so a killed batch leaves
whole files or none.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable
from pathlib import Path

from lagwise.models import jsonread as jr
from lagwise.models.atomic import write_output
from lagwise.models.errors import DataError, OutputError, SpecError
from lagwise.models.personfit import BatchSettings, PersonOutcome

MANIFEST, PEOPLE_DIR, PEOPLE_LINES = "batch.json", "people", "people.jsonl"
SUMMARY, ESTIMATES, WIDE = "summary.json", "estimates.csv", "estimates-wide.csv"
FORMAT = "lagwise-batch"


def open_folder(out: str | Path, settings: BatchSettings) -> Path:
    """Make (or reopen) the batch folder `out` for `settings`; SpecError when it holds a batch
    made with other settings, OutputError when it cannot be made."""
    out = Path(out)
    try:
        (out / PEOPLE_DIR).mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise OutputError(f"{out}: cannot make the batch folder "
                          f"({error.strerror or error})") from None
    manifest = out / MANIFEST
    fingerprint = settings.fingerprint()
    if manifest.exists():
        if _stored_fingerprint(manifest) != fingerprint:
            raise SpecError(f"{out} holds a batch made with another model or other settings; "
                            "give another output folder, or empty this one")
        return out
    doc = {"format": FORMAT, "fingerprint": fingerprint, "settings": settings.to_json()}
    write_output(manifest, json.dumps(doc, indent=2, allow_nan=False), "the batch settings")
    return out


def person_path(out: Path, person: str) -> Path:
    """The file of one person's outcome (named by a digest: any person name is safe)."""
    return out / PEOPLE_DIR / f"{hashlib.sha256(person.encode()).hexdigest()[:24]}.json"


def load_outcome(out: Path, person: str, fingerprint: str) -> PersonOutcome | None:
    """The stored outcome of `person` when it was made from the same settings and data, else
    None (the person is fitted again)."""
    path = person_path(out, person)
    if not path.is_file():
        return None
    try:
        outcome = PersonOutcome.from_json(jr.parse(path.read_text(encoding="utf-8")))
    except (OSError, ValueError, RecursionError):
        return None
    if outcome.person != person or outcome.fingerprint != fingerprint:
        return None
    return outcome


def save_outcome(out: Path, outcome: PersonOutcome) -> None:
    """Write one person's outcome atomically."""
    write_output(person_path(out, outcome.person),
                 json.dumps(outcome.to_json(), allow_nan=False), f"the result of {outcome.person}")


def write_people(out: Path, outcomes: Iterable[PersonOutcome]) -> None:
    """DIR/people.jsonl: one line per person with a fit document, in study order."""
    lines = [json.dumps({"person": o.person, **o.document}, allow_nan=False)
             for o in outcomes if o.document is not None]
    write_output(out / PEOPLE_LINES, "".join(line + "\n" for line in lines), "the people's fits")


def read_batch(out: str | Path) -> tuple[PersonOutcome, ...]:
    """The outcomes of a finished batch folder, in study order (as summary.json lists the
    people); DataError when the folder holds no finished batch or a file cannot be read."""
    out = Path(out)
    try:
        summary = jr.parse((out / SUMMARY).read_text(encoding="utf-8"))
        people = jr.read_fields(summary, SUMMARY, (
            jr.field("people", jr.tuple_of, item=jr.text),))["people"]
        return tuple(PersonOutcome.from_json(jr.parse(person_path(out, p).read_text("utf-8")),
                                             p) for p in people)
    except OSError as error:
        raise DataError(f"{out}: not a finished batch folder ({error.strerror or error})") from None
    except (ValueError, RecursionError) as error:
        raise DataError(f"{out}: a batch file cannot be read ({error})") from None


def _stored_fingerprint(manifest: Path) -> str | None:
    try:
        doc = jr.parse(manifest.read_text(encoding="utf-8"))
        return jr.read_fields(doc, "", (jr.field("fingerprint", jr.text),))["fingerprint"]
    except (OSError, ValueError, RecursionError):
        return None
