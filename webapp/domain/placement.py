"""When an entry was made, on the station's clock, for entries that waited on a tablet.

An entry made while the station could not be reached arrives late, sometimes many minutes
after the work it records. The station's clock saw only its arrival. The tablet's clock saw
both moments: when the entry was made (`device_time`) and when the tablet sent it
(`device_sent`). Their difference is how long the entry waited, by the tablet's count.

Decision rule (ours; the station never trusts a tablet clock's setting, only its count of
an interval, and only from a clock that agreed with its own): an entry is placed at its
arrival less the time it waited, when the tablet sent both times, the wait is from 0 to
`MAX_QUEUE_S`, and the tablet's clock read within `CLOCK_AGREEMENT_S` of the station's
when it sent the entry. Otherwise (a clock that went back, disagrees, or a time missing)
the entry is placed at its arrival, as every entry was placed before. Where a rule counts
a wait between entries placed this way (the discharge wait), it asks for
`COUNTED_WAIT_MARGIN_S` more than the approved data's minimum: a clock that agreed at the
end can have been behind at the start by up to the agreement allowance and been set right
in between, which overstates the count by as much.

Not covered (said in the record's caution and left for the grounding probe): a clock that
was wrong by more than the allowance when the work began and was set right by hand while
the entries waited.
"""

from __future__ import annotations

from datetime import datetime, timedelta

MAX_QUEUE_S = 24 * 3600.0
# How far a tablet's clock may read from the station's when it sends a waiting entry, for
# its count to be used (ours, no published source: tablets that take the network's time
# read within a second or two of each other, from memory; a clock set by hand to the
# minute shown is within 30 s).
CLOCK_AGREEMENT_S = 30.0
# Asked on top of a wait counted by a tablet's clock: the agreement allowance (see above).
COUNTED_WAIT_MARGIN_S = CLOCK_AGREEMENT_S


def waited_s(received_at: datetime, device_time: datetime | None,
             device_sent: datetime | None) -> float | None:
    """Seconds the entry waited on the tablet by its clock, or None when that count is not
    to be trusted (or there is none: the entry was sent when it was made)."""
    if device_time is None or device_sent is None:
        return None
    if abs((received_at - device_sent).total_seconds()) > CLOCK_AGREEMENT_S:
        return None
    waited = (device_sent - device_time).total_seconds()
    return waited if 0.0 <= waited <= MAX_QUEUE_S else None


def made_at(received_at: datetime, device_time: datetime | None,
            device_sent: datetime | None) -> datetime:
    """When the entry was made, on the station's clock (see the module's decision rule)."""
    waited = waited_s(received_at, device_time, device_sent)
    return received_at if waited is None else received_at - timedelta(seconds=waited)


def parse(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None
