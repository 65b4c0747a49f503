"""Where a report came from: input hashes, software versions and the time it was made.

``SOURCE_DATE_EPOCH`` (https://reproducible-builds.org/specs/source-date-epoch/) fixes the
creation time so that two runs on the same inputs give byte-identical output.
"""

from __future__ import annotations

import datetime as _dt
import os
import platform
from dataclasses import dataclass
from importlib import metadata

from reporter.errors import OptionError

_PACKAGES = ("anova-report", "numpy", "scipy")


@dataclass(frozen=True)
class Provenance:
    data_sha256: str | None
    plan_sha256: str | None
    data_file: str
    plan_file: str | None
    data_format: str
    software: tuple[tuple[str, str], ...]
    created: str
    data_reader: str = "in-memory"  # "out-of-core": read by DuckDB queries (duckdb_source)


def _version(name: str) -> str:
    try:
        return metadata.version(name)
    except metadata.PackageNotFoundError:
        return "not installed"


def software_versions(extra: tuple[str, ...] = ()) -> tuple[tuple[str, str], ...]:
    """Versions of Python and of the packages the computation used."""
    out = [("python", platform.python_version())]
    out += [(name, _version(name)) for name in (*_PACKAGES, *extra)]
    return tuple(out)


def created_timestamp() -> str:
    """ISO 8601 UTC time, from SOURCE_DATE_EPOCH when it is set."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch is not None:
        try:
            when = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
        except (ValueError, OverflowError, OSError):
            raise OptionError(f"SOURCE_DATE_EPOCH must be whole seconds since 1970 (got {epoch!r}).") from None
    else:
        when = _dt.datetime.now(tz=_dt.timezone.utc).replace(microsecond=0)
    return when.isoformat().replace("+00:00", "Z")


def collect_provenance(prep, extra_packages: tuple[str, ...] = ()) -> Provenance:
    plan, data = prep.plan, prep.data
    return Provenance(
        data_sha256=data.sha256,
        plan_sha256=plan.sha256,
        data_file=os.path.basename(data.source),
        plan_file=os.path.basename(str(plan.source)) if plan.source else None,
        data_format=data.format,
        software=software_versions(extra_packages + (("duckdb",) if data.reader == "out-of-core" else ())),
        created=created_timestamp(),
        data_reader=data.reader,
    )


