"""Bench: the work-record PDF render and render + sign against one-page baselines, in one run.

Measures median and p95 wall time of

  page         pdf_of_html of one full A4 page of the record's own kind: the record's
               stylesheet, header and a steps table with as many of the job's real step
               rows as fit on one page (found before timing). The baseline of the target.
  floor        pdf_of_html of a minimal page (record.css, a short paragraph, one small
               table): WeasyPrint's fixed cost for any page, printed for comparison
  render       render_for_signing(db, job, now, []) of a real exciter-removal job walked to
               its performer sign step: the print the performer's signature goes on, with
               the boxes for the signatures to come
  render_sign  the same render, then sign_record with the performer's signer, the stamp
               and the reserved boxes, as the station signs

and prints the ratios to both baselines against the target (render_sign <= 3x the one-page
baseline), the absolute medians against <= 1 s for a 1-3 page record, and the record's
page count. The four are interleaved round by round, so machine noise falls on all of
them alike.

The signer is unsealed once, outside the timing: the timed signing uses the unsealed
signer. The station unseals the key with the PIN (Argon2id) on every signature; that
cost is measured separately and printed, not counted in render_sign.

    .venv/bin/python bench/record_render.py [--iterations 20] [--warmup 2]
                                            [--profile] [--dir PATH]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import os
import pstats
import statistics
import sys
import tempfile
import time
import uuid
from collections.abc import Callable
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

from measuring import percentile, timed  # bench/ is on sys.path when a bench runs
from pypdf import PdfReader

from webapp import create_app, store
from webapp.records import identity, signing
from webapp.records.pdf import font_configuration, pdf_of_html, record_html, render_for_signing
from webapp.station import demo_jobs, recording
from webapp.station.authority import station_authority
from webapp.station.library import load_shop_library
from webapp.station.scenario import load_scenario, read_scenario, scenario_path
from webapp.store import fleet, people
from webapp.store import signers as signer_store

RATIO_TARGET = 3.0  # render + sign <= 3x the one-page baseline
ABSOLUTE_TARGET_S = 1.0  # <= 1 s for a 1-3 page record
PROCEDURE = "exciter-removal"
MECHANIC = "mech1"
SIGN_STEP = "performer"
UNSEAL_ROUNDS = 3

FLOOR_HTML = """<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>Bench floor page</title>
<link rel="stylesheet" href="/static/css/record.css">
</head>
<body class="record-document">
<article class="work-record">
<h1>Bench page</h1>
<p>A short paragraph of ordinary text, so the floor lays out one line box or two in the
record's fonts.</p>
<table class="fields">
<tr><th scope="row">Aircraft registration</th><td>XX-BNC</td>
    <th scope="row">Engine serial</th><td>QE-0001</td></tr>
<tr><th scope="row">Channel</th><td>A</td>
    <th scope="row">Job</th><td>1</td></tr>
</table>
</article>
</body>
</html>
"""


# --- the station and the job --------------------------------------------------------------

def build_station(tmp: Path) -> tuple[Path, Any, datetime]:
    """A demo station database, built as tests/conftest.py builds it, with its authority."""
    db_path = tmp / "station.db"
    now = datetime.now(UTC).replace(microsecond=0) - timedelta(hours=1)
    db = store.create(db_path)
    try:
        load_shop_library(db, now)
        authority = station_authority(db_path, "Bench station", now)
        load_scenario(db, read_scenario(scenario_path()), now, authority)
    finally:
        db.close()
    return db_path, authority, now


def signed_job(db: store.Database, authority: Any, now: datetime) -> dict[str, Any]:
    """One exciter-removal job walked to its performer step and signed there through
    recording, the app's own path (unseal, chain, render, sign, store). Needs an app context:
    the record template comes from the app."""
    pin = next(p.pin for p in read_scenario(scenario_path()).people if p.username == MECHANIC)
    mech = people.person_by_username(db, MECHANIC)
    assert mech is not None
    engine_id = fleet.fleet(db)[0]["engines"][0]["id"]
    job_id = recording.open_job(db, procedure_id=PROCEDURE, engine_id=engine_id,
                                channel="A", person=mech, now=now)
    now = demo_jobs.walk(db, job_id, by=mech, now=now + demo_jobs.STEP_GAP, until=SIGN_STEP)
    outcome = recording.record_event(db, job_id, event_id=str(uuid.uuid4()), kind="signed",
                                     step_id=SIGN_STEP, data={"pin": pin}, device_time=None,
                                     person=mech, now=now, authority=authority)
    assert outcome.status == "stored", outcome
    stored = signer_store.latest_record(db, job_id)
    assert stored is not None and stored["signatures"] == 1
    enrolled = signer_store.signer(db, mech.id)
    assert enrolled is not None
    enrolment = identity.Enrolment(cert_pem=enrolled["cert_pem"],
                                   sealed=identity.SealedKey.from_json(enrolled["sealed_key"]))
    return {"job_id": job_id, "now": now, "pin": pin, "person": mech, "authority": authority,
            "enrolment": enrolment, "stored_pdf": stored["pdf"],
            "steps_done": len(recording.load_job(db, job_id).state.completed)}


# --- measuring ----------------------------------------------------------------------------

def pages_of(pdf: bytes) -> int:
    return len(PdfReader(io.BytesIO(pdf)).pages)


def full_page_html(record: str) -> str:
    """One A4 page of the record's own kind: its head, stylesheet and section 1, then its
    steps table cut to as many rows as fit on one page (the most found by bisection)."""
    head, _, rest = record.partition('<section id="s3">')
    table_start = rest.index("<tbody>") + len("<tbody>")
    rows = rest[table_start:rest.index("</tbody>")].split("</tr>")[:-1]
    rows = (rows * 4)[:60]  # more rows than a page holds, all real step rows

    def page_with(n: int) -> str:
        return (head + '<section id="s3">' + rest[:table_start] + "</tr>".join(rows[:n])
                + "</tr></tbody></table></section></article></body></html>")

    low, high = 1, len(rows)
    assert pages_of(pdf_of_html(page_with(low))) == 1
    while low < high:
        middle = (low + high + 1) // 2
        if pages_of(pdf_of_html(page_with(middle))) == 1:
            low = middle
        else:
            high = middle - 1
    return page_with(low)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--iterations", type=int, default=20, help="timed rounds (default 20)")
    parser.add_argument("--warmup", type=int, default=2, help="untimed rounds first (default 2)")
    parser.add_argument("--dir", type=Path, default=None,
                        help="put the temporary station here (default: the system temp dir)")
    parser.add_argument("--profile", action="store_true",
                        help="after timing, profile extra renders and signings")
    args = parser.parse_args(argv)
    if args.iterations < 2 or args.warmup < 0:
        parser.error("--iterations must be at least 2, --warmup at least 0")

    with tempfile.TemporaryDirectory(prefix="sparkward-bench-", dir=args.dir) as tmpname:
        tmp = Path(tmpname)
        # Keep the bench hermetic: no instance file from the working directory.
        os.environ["SPARKWARD_INSTANCE"] = str(tmp / "instance")
        os.environ.pop("SPARKWARD_DB", None)
        setup_started = time.perf_counter()
        db_path, authority, now = build_station(tmp)
        app = create_app({"DB_PATH": str(db_path), "SECRET_KEY": "bench", "TESTING": False})
        with app.app_context():
            db = store.connect(db_path)
            try:
                built = signed_job(db, authority, now)
                run(db, built, args, time.perf_counter() - setup_started)
            finally:
                db.close()
    return 0


def run(db: store.Database, built: dict[str, Any], args: argparse.Namespace,
        setup_s: float) -> None:
    job_id, now, person = built["job_id"], built["now"], built["person"]
    authority, enrolment, pin = built["authority"], built["enrolment"], built["pin"]
    state = recording.load_job(db, job_id).state
    signatures = recording.signatures_of(state)
    assert [s["step"] for s in signatures] == [SIGN_STEP], signatures
    meaning = f"{signatures[0]['meaning']} ({signatures[0]['scope']})"

    # Unsealed once, outside the timing (Argon2id); the timed signing reuses it.
    signer = identity.signer_for(enrolment, pin, authority.cert)
    font_configuration()  # the process's one FontConfiguration, built before any timing

    page_html = full_page_html(record_html(db, job_id, now, []))

    def page() -> bytes:
        return pdf_of_html(page_html)

    def floor() -> bytes:
        return pdf_of_html(FLOOR_HTML)

    def printed() -> tuple[bytes, dict[str, signing.StampBox]]:
        return render_for_signing(db, job_id, now, [], record_revision=1)

    def render() -> bytes:
        return printed()[0]

    sign_share: list[float] = []
    stamp = (f"Signed electronically by {person.full_name}\nMeaning: {meaning}\n"
             f"Date and time: {now:%Y-%m-%d %H:%M:%S} UTC")

    def sign(pdf: bytes, boxes: dict[str, signing.StampBox]) -> bytes:
        # sign_record runs pyHanko in signing.py's worker thread and waits for it.
        return signing.sign_record(pdf, signer, field_name=SIGN_STEP, meaning=meaning,
                                   signer_name=person.full_name, stamp=stamp, reserve=boxes)

    def render_sign() -> bytes:
        pdf, boxes = printed()
        started = time.perf_counter()
        signed = sign(pdf, boxes)
        sign_share.append(time.perf_counter() - started)
        return signed

    # Sanity, outside the timing: one page for each baseline, the record as the app stored
    # it, and a signature that verifies against the station's authority.
    floor_pages, page_pages = pages_of(floor()), pages_of(page())
    assert floor_pages == 1 and page_pages == 1, (floor_pages, page_pages)
    record_pdf = render()
    record_pages = pages_of(record_pdf)
    stored_pages = pages_of(built["stored_pdf"])
    assert record_pages == stored_pages, (record_pages, stored_pages)
    signed = render_sign()
    reports = signing.verify_record(signed, authority.cert)
    assert signing.all_good(reports) and len(reports) == 1, [r.summary for r in reports]
    sign_share.clear()

    benches: dict[str, Callable[[], bytes]] = {
        "page": page, "floor": floor, "render": render, "render_sign": render_sign}
    names = list(benches)
    samples: dict[str, list[float]] = {n: [] for n in names}
    started = time.perf_counter()
    for round_no in range(args.warmup + args.iterations):
        shift = round_no % len(names)  # rotate the order so no bench always follows another
        if round_no == args.warmup:
            sign_share.clear()
        for name in names[shift:] + names[:shift]:
            elapsed = timed(benches[name])
            if round_no >= args.warmup:
                samples[name].append(elapsed)
    wall = time.perf_counter() - started

    unseal = [timed(lambda: identity.signer_for(enrolment, pin, authority.cert))
              for _ in range(UNSEAL_ROUNDS)]

    report(samples, sign_share, unseal, args, wall, setup_s,
           {"record_pages": record_pages, "record_kib": len(record_pdf) / 1024,
            "steps_done": built["steps_done"], "page_rows": page_html.count("<tr")})

    if args.profile:
        profile(render, record_pdf, signer, meaning, person.full_name, max(5, args.iterations // 2))


def report(samples: dict[str, list[float]], sign_share: list[float], unseal: list[float],
           args: argparse.Namespace, wall: float, setup_s: float, facts: dict[str, Any]) -> None:
    stats = {n: (statistics.median(v) * 1000, percentile(v, 0.95) * 1000)
             for n, v in samples.items()}
    print(f"Sparkward bench: work-record PDF, {args.iterations} timed rounds after "
          f"{args.warmup} warm-up, interleaved ({wall:.1f} s; station built in {setup_s:.1f} s)")
    print(f"record: {PROCEDURE} job walked by {MECHANIC} to its {SIGN_STEP} step and signed "
          f"there ({facts['steps_done']} steps done), {facts['record_pages']} page"
          f"{'' if facts['record_pages'] == 1 else 's'}, {facts['record_kib']:.0f} KiB "
          f"unsigned; baselines: one page of the record's kind ({facts['page_rows']} table "
          f"rows), and a minimal page")
    print("render_sign signs with a signer unsealed once before timing (no Argon2id in it)")
    print()
    print(f"{'measure':<14}{'median ms':>11}{'p95 ms':>10}")
    for name, (med, p95) in stats.items():
        print(f"{name:<14}{med:>11.1f}{p95:>10.1f}")
    sign_med = statistics.median(sign_share) * 1000
    print(f"{'  of it sign':<14}{sign_med:>11.1f}{percentile(sign_share, 0.95) * 1000:>10.1f}")
    print()
    print(f"{'ratio':<22}{'median':>8}{'p95':>8}  target  met (median / p95)")
    for label, num, base, target in (
            ("render / page", "render", "page", None),
            ("render_sign / page", "render_sign", "page", RATIO_TARGET),
            ("render_sign / floor", "render_sign", "floor", None)):
        rm = stats[num][0] / stats[base][0]
        rp = stats[num][1] / stats[base][1]
        if target is None:
            print(f"{label:<22}{rm:>7.2f}x{rp:>7.2f}x  (no target)")
        else:
            met = " / ".join("yes" if r <= target else "NO" for r in (rm, rp))
            print(f"{label:<22}{rm:>7.2f}x{rp:>7.2f}x  <= {target:.0f}x  {met}")
    print()
    limit_ms = ABSOLUTE_TARGET_S * 1000
    for name in ("render", "render_sign"):
        med, p95 = stats[name]
        met = " / ".join("yes" if v <= limit_ms else "NO" for v in (med, p95))
        print(f"{name:<14}median {med:7.1f} ms, p95 {p95:7.1f} ms  "
              f"<= {limit_ms:.0f} ms for a 1-3 page record: {met} (median / p95)")
    print(f"\nNot counted above: the station unseals the signer's key with the PIN on every "
          f"signature, {statistics.median(unseal) * 1000:.0f} ms (median of {len(unseal)}).")


def profile(render: Callable[[], bytes], pdf: bytes, signer: Any, meaning: str,
            signer_name: str, rounds: int) -> None:
    prof = cProfile.Profile()
    prof.enable()
    for _ in range(rounds):
        render()
    prof.disable()
    _print_profile(prof, f"render_for_signing, {rounds} renders")

    # pyHanko runs in signing.py's worker thread; profile it there (cProfile is per thread).
    def profiled_sign() -> cProfile.Profile:
        inner = cProfile.Profile()
        inner.enable()
        for _ in range(rounds):
            signing._sign(pdf, signer, SIGN_STEP, meaning, signer_name, None, meaning, {})
        inner.disable()
        return inner

    _print_profile(signing._off_thread(profiled_sign), f"sign_record, {rounds} signings")


def _print_profile(prof: cProfile.Profile, title: str) -> None:
    for order in ("cumulative", "tottime"):
        out = io.StringIO()
        pstats.Stats(prof, stream=out).sort_stats(order).print_stats(30)
        print(f"\n=== profile: {title}, by {order} time ===")
        print(out.getvalue())


if __name__ == "__main__":
    sys.exit(main())
