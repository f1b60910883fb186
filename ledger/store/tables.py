"""The ledger's tables, as SQLAlchemy Core metadata (the migrations must agree: `alembic check`).

Core tables rather than ORM or SQLModel classes: a ``log`` command must start in a few tenths
of a second (SQLModel pulls in the ORM and pydantic, about twice the import time), and the
estate-wide work is set-based SQL anyway. Rows are mapped to the frozen domain records in
``repository.py``.

Masses are BIGINT nanograms (up to 9.2e18 ng, about 9 223 t); dates that something happened are DATE; times the ledger
recorded are timezone-aware UTC.
"""

from __future__ import annotations

from sqlalchemy import (
    BigInteger,
    Boolean,
    Column,
    Date,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    LargeBinary,
    MetaData,
    String,
    Table,
    Text,
    UniqueConstraint,
)

# Named constraints so later migrations (and SQLite batch mode) can refer to them.
NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

metadata = MetaData(naming_convention=NAMING_CONVENTION)

site = Table(
    "site",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("code", String(40), nullable=False, unique=True),
    Column("name", String(200), nullable=False),
    Column("country", String(2), nullable=False),
    Column("subdivision", String(10)),
    Column("timezone", String(64), nullable=False),
    Column("regimes", String(200), nullable=False, server_default=""),  # comma-separated codes
    Column("leak_rate_method", String(20), nullable=False, server_default="annualizing"),
    Column("mass_unit", String(4), nullable=False, server_default="kg"),
    Column("created_at", DateTime(timezone=True), nullable=False),
)

company = Table(
    "company",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(200), nullable=False, unique=True),
    Column("certificate", String(100)),  # company certificate number, where a scheme issues one
)

technician = Table(
    "technician",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(200), nullable=False, unique=True),
    Column("company_id", Integer, ForeignKey("company.id")),
    Column("created_at", DateTime(timezone=True), nullable=False),
)

certificate = Table(
    "certificate",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("technician_id", Integer, ForeignKey("technician.id"), nullable=False, index=True),
    Column("scheme", String(200), nullable=False),
    Column("number", String(100), nullable=False),
    Column("category", String(100), nullable=False, server_default=""),
    Column("valid_from", Date),
    Column("valid_to", Date),
    Column("scope", String(10)),  # eu, gb, us-608; NULL = not recorded (hashed only when set)
    Column("issuer", String(200)),
    UniqueConstraint("scheme", "number", name="uq_certificate_scheme_number"),
)

# Company (undertaking) certificates, e.g. Reg. (EU) 2024/573 Art 10; printed on the logbook.
company_certificate = Table(
    "company_certificate",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("company_id", Integer, ForeignKey("company.id"), nullable=False, index=True),
    Column("scope", String(10), nullable=False),
    Column("number", String(100), nullable=False),
    Column("issuer", String(200), nullable=False, server_default=""),
    Column("valid_from", Date),
    Column("valid_to", Date),
    UniqueConstraint("scope", "number", name="uq_company_certificate_scope_number"),
)

cylinder = Table(
    "cylinder",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("code", String(100), nullable=False, unique=True),
    Column("refrigerant", String(40), nullable=False),
    Column("kind", String(20), nullable=False),
    Column("tare_ng", BigInteger),
    Column("created_at", DateTime(timezone=True), nullable=False),
)

system = Table(
    "system",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("site_id", Integer, ForeignKey("site.id"), nullable=False),
    Column("tag", String(100), nullable=False),
    Column("description", Text, nullable=False, server_default=""),
    Column("application", String(40), nullable=False),
    Column("equipment_form", String(40), nullable=False, server_default="other"),
    Column("hermetic", Boolean, nullable=False, server_default="0"),
    Column("residential", Boolean, nullable=False, server_default="0"),
    Column("location", Text, nullable=False, server_default=""),
    Column("maker", String(200), nullable=False, server_default=""),
    Column("model", String(200), nullable=False, server_default=""),
    Column("serial", String(200), nullable=False, server_default=""),
    Column("defrost_every_hours", Float),
    Column("created_at", DateTime(timezone=True), nullable=False),
    UniqueConstraint("site_id", "tag", name="uq_system_site_id_tag"),
)

event = Table(
    "event",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("system_id", Integer, ForeignKey("system.id"), nullable=False),
    Column("kind", String(20), nullable=False),
    Column("performed_on", Date, nullable=False),
    Column("recorded_at", DateTime(timezone=True), nullable=False),
    Column("mass_ng", BigInteger),
    Column("refrigerant", String(40)),
    Column("charge_ng", BigInteger),
    Column("result", String(20)),
    Column("location", Text),
    Column("method", String(100)),
    Column("destination", String(20)),
    Column("cylinder_id", Integer, ForeignKey("cylinder.id")),
    Column("cylinder_before_ng", BigInteger),
    Column("cylinder_after_ng", BigInteger),
    Column("technician_id", Integer, ForeignKey("technician.id")),
    Column("certificate_id", Integer, ForeignKey("certificate.id")),
    Column("recorded_by", String(200)),
    Column("note", Text, nullable=False, server_default=""),
    Column("voids_id", Integer, ForeignKey("event.id")),
    Column("reason", Text),
    Column("attachments", Text, nullable=False, server_default=""),  # space-separated SHA-256
    Column("reclaimed", Boolean, nullable=False, server_default="0"),
    Column("content_key", String(64)),  # import idempotency: digest of the imported row
    # EU 2024/573 Art 6(c) (517/2014 Art 6(1)(c)): the recycling, reclamation or destruction
    # facility (name and address) and, where applicable, its certificate number
    Column("facility", Text),
    Column("facility_certificate", String(200)),
    Column("prev_hash", String(64), nullable=False),
    Column("chain_hash", String(64), nullable=False, unique=True),
    Index("ix_event_system_id_id", "system_id", "id"),
    Index("ix_event_system_id_performed_on", "system_id", "performed_on"),
    Index("ix_event_content_key", "content_key"),
    Index("ix_event_kind_performed_on", "kind", "performed_on"),
)

detector_channel = Table(
    "detector_channel",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("site_id", Integer, ForeignKey("site.id"), nullable=False),
    Column("code", String(100), nullable=False),
    Column("system_id", Integer, ForeignKey("system.id"), nullable=False, index=True),
    Column("levels_ppm", String(100), nullable=False),  # ascending, comma-separated
    Column("night_start", String(5), nullable=False, server_default="22:00"),
    Column("night_end", String(5), nullable=False, server_default="06:00"),
    Column("created_at", DateTime(timezone=True), nullable=False),
    UniqueConstraint("site_id", "code", name="uq_detector_channel_site_id_code"),
)

# Episodes are derived from readings by `detector review` and cached here so that `due`,
# `system show` and the logbook can use them without rescanning the readings store.
detector_episode = Table(
    "detector_episode",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("channel_id", Integer, ForeignKey("detector_channel.id"), nullable=False),
    Column("level", Integer, nullable=False),
    Column("start_at", DateTime(timezone=True), nullable=False),
    Column("end_at", DateTime(timezone=True), nullable=False),
    Column("peak_ppm", Float, nullable=False),
    Column("ppm_hours", Float, nullable=False),
    Column("reviewed_at", DateTime(timezone=True), nullable=False),
    Index("ix_detector_episode_channel_id_start_at", "channel_id", "start_at"),
)

# One row per report written: what it was built from, so it can be reproduced and tied to
# the chain heads printed on it.
report_run = Table(
    "report_run",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("made_at", DateTime(timezone=True), nullable=False),
    Column("kind", String(40), nullable=False),
    Column("subject", String(200), nullable=False),
    Column("as_of", Date, nullable=False),
    Column("regime_versions", String(400), nullable=False, server_default=""),
    Column("chain_digest", String(64), nullable=False),
)

# Reports filed with an authority (append-only, like events): they meet `report` obligations.
filing = Table(
    "filing",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("site_id", Integer, ForeignKey("site.id"), nullable=False, index=True),
    Column("system_id", Integer, ForeignKey("system.id")),
    Column("regime", String(20), nullable=False),
    Column("period_year", Integer, nullable=False),
    Column("filed_on", Date, nullable=False),
    Column("reference", String(200), nullable=False, server_default=""),
    Column("recorded_by", String(200)),
    Column("recorded_at", DateTime(timezone=True), nullable=False),
)

# --- kept results ----------------------------------------------------------------------------
# `due` and the annual summary keep what they computed per site, so that the next run reads a
# few rows per site instead of folding every history and running every rule again. Derived
# data, never a record: not exported or restored, and any row may be dropped at any time (the
# next run recomputes). A site's kept rows are current while its revision is the one kept.

# A counter per site, raised by triggers (migration 0003) whenever a record that bears on its
# obligations or summaries is added: an event, a system, a filing, a detector episode (or an
# episode removed by a new review). Bulk writers lock the rows of the sites they write to, in
# site order, before writing (repository.lock_systems).
site_revision = Table(
    "site_revision",
    metadata,
    Column("site_id", Integer, ForeignKey("site.id"), primary_key=True),
    Column("n", BigInteger, nullable=False, server_default="0"),
)

# What `due` showed for a site on `as_of`: reused for a later day while the site's revision
# and `rules_key` are the same and the day lies from `as_of` to `fresh_until` in the same year
# (see services/obligations.py).
kept_site = Table(
    "kept_site",
    metadata,
    Column("site_id", Integer, ForeignKey("site.id"), primary_key=True),
    Column("as_of", Date, nullable=False),
    Column("fresh_until", Date),  # the earliest due day of an open duty: later, statuses move
    Column("rules_key", String(64), nullable=False),
    Column("revision", BigInteger, nullable=False),
    Column("computed_at", DateTime(timezone=True), nullable=False),
    Column("inputs", String(64)),  # digest of what the rows were computed from (obligations.site_inputs)
    Column("content", String(64)),  # digest of this row and the site's kept rows (obligations.kept_content)
)

# The site's unmet obligations that `due` shows (the current period of each periodic series
# and every unmet one-off duty), as of `kept_site.as_of`.
kept_obligation = Table(
    "kept_obligation",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("site_id", Integer, ForeignKey("site.id"), nullable=False, index=True),
    Column("system_id", Integer, ForeignKey("system.id")),
    Column("regime", String(20), nullable=False),
    Column("kind", String(40), nullable=False),
    Column("due_on", Date, nullable=False),
    Column("earliest_on", Date),
    Column("citation", Text, nullable=False),
    Column("confidence", String(20), nullable=False),
    Column("basis_note", Text, nullable=False, server_default=""),
    Column("caused_by", Integer),
    Column("detail", Text, nullable=False, server_default=""),
    Column("earlier_missed", Integer),  # periodic series: periods missed before the last met one
)

kept_finding = Table(
    "kept_finding",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("site_id", Integer, ForeignKey("site.id"), nullable=False, index=True),
    Column("source", Text, nullable=False),
    Column("message", Text, nullable=False),
    Column("severity", String(10), nullable=False),
    Column("field", String(40)),
)

# One site's part of an annual summary (reporting.AnnualPart) for a year, GWP basis and as-of
# day; current while the site's revision and `rules_key` are those kept. `body` is a pickle of
# plain values, dates and Decimals only (read back with a restricted unpickler).
kept_annual = Table(
    "kept_annual",
    metadata,
    Column("site_id", Integer, ForeignKey("site.id"), primary_key=True),
    Column("year", Integer, primary_key=True),
    Column("basis", String(10), primary_key=True),
    Column("as_of", Date, nullable=False),
    Column("rules_key", String(64), nullable=False),
    Column("revision", BigInteger, nullable=False),
    Column("computed_at", DateTime(timezone=True), nullable=False),
    Column("body", LargeBinary, nullable=False),
    Column("inputs", String(64)),  # as kept_site.inputs
    Column("content", String(64)),  # digest of this row's other columns (reporting._annual_content)
)

# --- integrity beyond the events ---------------------------------------------------------------

# Every version of every record row (site, system, company, technician, certificate, cylinder,
# detector channel, filing), hashed into one chain (store/records.py). Append-only (triggers).
record_version = Table(
    "record_version",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("table_name", String(40), nullable=False),
    Column("row_id", Integer, nullable=False),
    Column("body", Text, nullable=False),  # canonical JSON: table, key, at, fields, v
    Column("recorded_at", DateTime(timezone=True), nullable=False),
    Column("prev_hash", String(64), nullable=False),
    Column("chain_hash", String(64), nullable=False, unique=True),
    Index("ix_record_version_table_name_row_id", "table_name", "row_id"),
)

# Signed statements of every chain head (services/checkpoints.py). Append-only (triggers); a
# copy given to an auditor outside the database is what makes them worth having.
checkpoint = Table(
    "checkpoint",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("made_at", DateTime(timezone=True), nullable=False),
    Column("statement", Text, nullable=False),  # canonical JSON, the signed bytes
    Column("signature", String(128), nullable=False),  # Ed25519, hex
    Column("key_id", String(16), nullable=False),
    Column("public_key", String(64), nullable=False),  # raw Ed25519 public key, hex
)

# --- web accounts (migration 0005) -------------------------------------------------------------
# Who may use the web app (`refledger serve`) and in which role. Not records of the ledger:
# neither exported nor restored (see services/backup.py), so password hashes never leave the
# database they were made in.
app_user = Table(
    "app_user",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(100), nullable=False, unique=True),
    Column("role", String(20), nullable=False),  # technician, officer, auditor, admin
    Column("password_hash", Text, nullable=False),  # argon2id, PHC string
    Column("technician_id", Integer, ForeignKey("technician.id")),  # the technician record they are
    Column("sites", String(400), nullable=False, server_default=""),  # comma-separated; empty: every site
    Column("disabled", Boolean, nullable=False, server_default="0"),
    Column("created_at", DateTime(timezone=True), nullable=False),
)

# A logged-in browser: only the SHA-256 of the cookie's token is stored.
web_session = Table(
    "web_session",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("token_hash", String(64), nullable=False, unique=True),
    Column("user_id", Integer, ForeignKey("app_user.id"), nullable=False, index=True),
    Column("csrf", String(64), nullable=False),
    Column("created_at", DateTime(timezone=True), nullable=False),
    Column("last_seen_at", DateTime(timezone=True), nullable=False),
)

# Failed logins, counted per name over a window to limit guessing.
login_failure = Table(
    "login_failure",
    metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(100), nullable=False, index=True),
    Column("at", DateTime(timezone=True), nullable=False),
)
