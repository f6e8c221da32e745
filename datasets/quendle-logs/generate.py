"""Generate the Quendle & Marsh demo set: synthetic logs of four in-house systems.

Each system writes its own line format. Three systems pass through distinct phases (message
families) one after another; ``phases.tsv`` gives their line ranges. Output: ``logs/*.log``,
``labels.tsv`` and ``phases.tsv``. The same seed gives byte-identical files.
"""

from __future__ import annotations

import argparse
import json
from collections.abc import Callable, Sequence
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import TypeVar

import numpy as np

DEFAULT_SEED = 31415
MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
T = TypeVar("T")
Phase = tuple[str, list[str]]


class Clock:
    """Monotonic clock advancing by exponential gaps."""

    def __init__(self, rng: np.random.Generator, start: datetime, mean_gap_s: float) -> None:
        self.rng = rng
        self.now = start
        self.mean_gap_s = mean_gap_s

    def tick(self, scale: float = 1.0) -> datetime:
        """Advance and return the new time."""
        gap_us = int(self.rng.exponential(self.mean_gap_s * scale) * 1e6) + 1
        self.now += timedelta(microseconds=gap_us)
        return self.now


def pick(rng: np.random.Generator, items: Sequence[T], p: Sequence[float] | None = None) -> T:
    """Pick one item, optionally weighted."""
    if p is None:
        return items[int(rng.integers(len(items)))]
    w = np.asarray(p, dtype=float)
    return items[int(rng.choice(len(items), p=w / w.sum()))]


def hexid(rng: np.random.Generator, n: int) -> str:
    """Random lowercase hex id of n digits."""
    return "".join(pick(rng, "0123456789abcdef") for _ in range(n))


def lognorm_ms(rng: np.random.Generator, median: float, sigma: float = 0.6) -> int:
    """Latency-like integer, log-normal around median."""
    return max(1, int(median * np.exp(sigma * rng.standard_normal())))


# --- Brisquet: payment gateway (key=value, ISO 8601 UTC) ------------------------------------


def brisquet(rng: np.random.Generator) -> list[Phase]:
    """Payment gateway: authorizations, then nightly settlement, then an acquirer incident."""
    clock = Clock(rng, datetime(2025, 3, 13, 21, 40, 0, tzinfo=UTC), 0.9)
    merchants = [f"M{int(rng.integers(10_000, 99_999))}" for _ in range(40)]
    curs, cards = ["EUR", "GBP", "SEK", "DKK"], ["visa", "mc", "amex"]

    def line(level: str, comp: str, body: str, scale: float = 1.0) -> str:
        t = clock.tick(scale)
        return f"{t:%Y-%m-%dT%H:%M:%S}.{t.microsecond // 1000:03d}Z {level:<5} {comp:<7} {body}"

    def auth() -> str:
        req, mer = hexid(rng, 10), pick(rng, merchants)
        amt = f"{rng.lognormal(3.3, 0.9):.2f}"
        cur, card = pick(rng, curs, [6, 2, 1, 1]), pick(rng, cards, [6, 4, 1])
        kind = pick(rng, ["auth", "capture", "3ds", "refund"], [10, 6, 3, 1])
        if kind == "3ds":
            flow = pick(rng, ["frictionless", "challenge"], [3, 1])
            return line("INFO", "3ds", f"req={req} mer={mer} flow={flow} ms={lognorm_ms(rng, 240)}")
        if kind == "capture":
            return line(
                "INFO", "capture", f"req={req} auth=A{int(rng.integers(100_000, 1_000_000))} ok"
            )
        if kind == "refund":
            return line("INFO", "refund", f"req={req} mer={mer} amt={amt} cur={cur} res=queued")
        if rng.random() < 0.09:
            rc = pick(rng, ["05", "51", "54", "61"])
            return line("WARN", "auth", f"req={req} mer={mer} amt={amt} cur={cur} declined rc={rc}")
        ms = lognorm_ms(rng, 85)
        return line("INFO", "auth", f"req={req} mer={mer} amt={amt} cur={cur} {card} ms={ms}")

    p1 = [auth() for _ in range(1000)]

    p2: list[str] = []
    for acq in ("northbank", "eastmere", "harlow"):
        p2.append(line("INFO", "settle", f"run=S0314 acq={acq} window=2025-03-13 state=open", 40))
        for b in range(1, 33):
            batch = f"{acq[:2].upper()}-0314-{b:03d}"
            rec = int(rng.integers(150, 900))
            gross = rng.lognormal(3.3, 0.9) * rec
            fees = gross * rng.uniform(0.011, 0.016)
            p2.append(
                line(
                    "INFO",
                    "settle",
                    f"batch={batch} rec={rec} gross={gross:.2f} fees={fees:.2f} "
                    f"net={gross - fees:.2f}",
                    3,
                )
            )
            for _ in range(int(rng.integers(3, 7))):
                ref = f"R{int(rng.integers(10_000_000, 100_000_000))}"
                if rng.random() < 0.12:
                    exp = rng.lognormal(3.0, 0.8)
                    got = exp - rng.choice([0.01, 0.1, 1.0]) * int(rng.integers(1, 10))
                    p2.append(
                        line(
                            "WARN",
                            "recon",
                            f"batch={batch} ref={ref} expected={exp:.2f} got={got:.2f} "
                            "flag=manual_review",
                            0.4,
                        )
                    )
                else:
                    row = int(rng.integers(1, rec))
                    p2.append(line("DEBUG", "recon", f"batch={batch} row={row} ref={ref} ok", 0.2))
        p2.append(line("INFO", "settle", f"run=S0314 acq={acq} state=reconciled", 5))

    p3: list[str] = []
    fails = 0
    while len(p3) < 520:
        r = rng.random()
        req = hexid(rng, 10)
        if r < 0.55:
            fails += 1
            attempt = int(rng.integers(1, 4))
            p3.append(
                line(
                    "ERROR",
                    "acq",
                    f"req={req} acq=eastmere err=timeout waited_ms=30000 try={attempt}/3",
                    0.5,
                )
            )
        elif r < 0.7:
            state = pick(rng, ["open", "half_open", "open"])
            p3.append(line("WARN", "breaker", f"acq=eastmere state={state} fails={fails} win=60s"))
        elif r < 0.8:
            p3.append(line("ERROR", "acq", f"req={req} unhandled exception in acquirer session"))
            frames = [
                "brisquet.acquirer.Session.send(Session.kt:211)",
                "brisquet.acquirer.Pool.withConnection(Pool.kt:88)",
                "brisquet.route.Router.dispatch(Router.kt:143)",
                "brisquet.http.AuthHandler.handle(AuthHandler.kt:57)",
            ]
            p3.append("brisquet.acquirer.UpstreamTimeout: no response from eastmere in 30000 ms")
            p3.extend(f"\tat {f}" for f in frames[: int(rng.integers(2, 5))])
        elif r < 0.9:
            alt = pick(rng, ["northbank", "harlow"])
            p3.append(line("INFO", "route", f"req={req} failover acq=eastmere->{alt}"))
        else:
            p3.append(auth())
    return [("authorizations", p1), ("settlement", p2), ("incident", p3)]


# --- Tarnwheel: job scheduler (BSD syslog) ----------------------------------------------------


def tarnwheel(rng: np.random.Generator) -> list[Phase]:
    """Job scheduler: job runs through the day, then the nightly planning window."""
    clock = Clock(rng, datetime(2025, 3, 14, 6, 0, 0, tzinfo=UTC), 12.0)
    hosts = {f"twsch{i}": int(rng.integers(1000, 9000)) for i in (1, 2)}
    jobs = [
        "inventory-sync",
        "price-refresh",
        "route-plan",
        "invoice-export",
        "stock-forecast",
        "cold-audit",
        "supplier-pull",
        "label-print",
    ]
    queues = ["default", "batch", "urgent"]
    runs: dict[str, int] = {}
    active: list[tuple[str, int, datetime]] = []

    def line(body: str, scale: float = 1.0) -> str:
        t = clock.tick(scale)
        host = pick(rng, list(hosts))
        stamp = f"{MONTHS[t.month - 1]} {t.day:2d} {t:%H:%M:%S}"
        return f"{stamp} {host} tarnwheel[{hosts[host]}]: {body}"

    p1: list[str] = []
    while len(p1) < 1200:
        if len(active) < 3 or (len(active) < 12 and rng.random() < 0.5):
            job = pick(rng, jobs)
            run = runs[job] = runs.get(job, int(rng.integers(10_000, 90_000))) + 1
            worker = f"w{int(rng.integers(1, 24)):02d}"
            p1.append(line(f"job {job}#{run} started on {worker} queue={pick(rng, queues)}"))
            active.append((job, run, clock.now))
            continue
        job, run, began = active.pop(int(rng.integers(len(active))))
        if rng.random() < 0.08:
            code = pick(rng, [1, 2, 137])
            p1.append(line(f"job {job}#{run} exited with code {code}, retry in 60s"))
            active.append((job, run, clock.now))
            continue
        secs = int((clock.tick() - began).total_seconds())
        p1.append(line(f"job {job}#{run} finished in {secs // 60}m{secs % 60:02d}s, exit 0"))

    p2: list[str] = []
    clock.now = datetime(2025, 3, 14, 22, 0, 0, tzinfo=UTC)
    epoch = int(rng.integers(900, 950))
    dags = ["nightly-close", "replenish", "ledger-roll", "cold-chain-report"]
    tenants = ["grocery-north", "grocery-south", "wholesale", "logistics"]
    while len(p2) < 800:
        r = rng.random()
        if r < 0.3:
            dag = pick(rng, dags)
            n = int(rng.integers(12, 80))
            e = n + int(rng.integers(5, 40))
            cp = int(rng.integers(20, 140))
            p2.append(line(f"planner: dag {dag} resolved {n} nodes {e} edges, crit {cp}m"))
        elif r < 0.55:
            w = f"w{int(rng.integers(1, 24)):02d}"
            epoch += int(rng.random() < 0.05)
            p2.append(line(f"lease: worker {w} renewed ttl=30s epoch={epoch}"))
        elif r < 0.75:
            tenant = pick(rng, tenants)
            cap = pick(rng, [200, 400, 800])
            used = int(rng.integers(cap // 4, cap))
            p2.append(line(f"quota: tenant {tenant} using {used}/{cap} slots"))
        elif r < 0.9:
            job = pick(rng, jobs)
            at = clock.now + timedelta(minutes=int(rng.integers(5, 600)))
            p2.append(line(f"cron: next fire of {job} at {at:%Y-%m-%dT%H:%M}Z"))
        else:
            node = f"n{int(rng.integers(1, 80))}"
            p2.append(line(f"planner: {node} of {pick(rng, dags)} blocked on upstream"))
    return [("job-runs", p1), ("planning", p2)]


# --- Fenmeter: cold-room sensor hub (JSON lines, epoch seconds) -------------------------------


def fenmeter(rng: np.random.Generator) -> list[Phase]:
    """Sensor hub: temperature and humidity readings, door events and alarms."""
    clock = Clock(rng, datetime(2025, 3, 14, 0, 0, 0, tzinfo=UTC), 4.0)
    rooms = {f"cr{i:02d}": pick(rng, [-18.0, -22.0, 3.0, 5.0]) for i in range(1, 9)}
    temps = dict(rooms)
    alarmed: set[str] = set()
    seq = int(rng.integers(10_000, 50_000))
    lines: list[str] = []
    while len(lines) < 2000:
        seq += 1
        t = clock.tick()
        room = pick(rng, list(rooms))
        rec: dict[str, object] = {"ts": round(t.timestamp(), 3), "seq": seq}
        r = rng.random()
        if r < 0.9:
            temps[room] += 0.15 * (rooms[room] - temps[room]) + 0.3 * rng.standard_normal()
            kind = pick(rng, ["temp", "rh"], [3, 1])
            val = temps[room] if kind == "temp" else 70 + 8 * rng.standard_normal()
            rec |= {"dev": f"{room}-{kind[0]}{int(rng.integers(1, 3))}", "m": kind}
            rec |= {"v": round(float(val), 2)}
            if rng.random() < 0.2:
                rec["bat"] = int(rng.integers(40, 100))
        elif r < 0.96:
            rec |= {"dev": f"{room}-door", "event": pick(rng, ["open", "close"])}
            temps[room] += rng.uniform(0.3, 2.0)
        else:
            rec |= {"hub": "fh2", "uptime_s": int(t.timestamp()) - 1_741_800_000}
            rec |= {"queue": int(rng.integers(0, 40)), "fw": "2.7.1"}
        lines.append(json.dumps(rec, separators=(",", ":")))
        high = temps[room] > rooms[room] + 3.0
        if high != (room in alarmed):  # edge-triggered: raise once, clear once
            alarmed ^= {room}
            seq += 1
            alarm = {"ts": round(clock.tick(0.05).timestamp(), 3), "seq": seq, "room": room}
            state = "raised" if high else "cleared"
            alarm |= {"alarm": "temp_high", "state": state, "v": round(temps[room], 2)}
            lines.append(json.dumps(alarm, separators=(",", ":")))
    return [("readings", lines)]


# --- Siltcache: cache tier (glog-style) -------------------------------------------------------


def siltcache(rng: np.random.Generator) -> list[Phase]:
    """Cache tier: steady serving, then a resharding with migrations and evictions."""
    clock = Clock(rng, datetime(2025, 3, 14, 8, 0, 0, tzinfo=UTC), 0.3)
    pid = int(rng.integers(1000, 9000))
    prefixes = ["sku", "cart", "price", "sess", "route"]

    def line(level: str, src: str, body: str, scale: float = 1.0) -> str:
        t = clock.tick(scale)
        return f"{level}{t:%m%d %H:%M:%S}.{t.microsecond:06d} {pid:7d} {src}] {body}"

    p1: list[str] = []
    while len(p1) < 1200:
        if rng.random() < 0.06:
            shard = int(rng.integers(0, 16))
            qps = int(rng.integers(900, 2600))
            ratio = rng.uniform(0.9, 0.98)
            body = (
                f"stats shard={shard:02d} qps={qps} hit={ratio:.3f} mem={rng.uniform(55, 80):.1f}%"
            )
            p1.append(line("I", "stats.go:41", body, 5))
            continue
        op = pick(rng, ["GET", "SET", "DEL"], [12, 4, 1])
        key = f"{pick(rng, prefixes)}:{int(rng.integers(1, 60_000))}"
        shard = int(rng.integers(0, 16))
        us = lognorm_ms(rng, 150)
        if op == "GET":
            hit = "hit" if rng.random() < 0.93 else "miss"
            size = int(rng.integers(64, 4096))
            p1.append(
                line("I", "serve.go:212", f"GET {key} {hit} shard={shard:02d} {size}B {us}us")
            )
        else:
            p1.append(line("I", "serve.go:230", f"{op} {key} ok shard={shard:02d} {us}us"))

    p2: list[str] = []
    nodes = [f"sc-{i:02d}" for i in range(1, 13)]
    done: dict[int, int] = {}
    epoch = int(rng.integers(300, 320))
    while len(p2) < 800:
        r = rng.random()
        if r < 0.45:
            slot = int(rng.integers(0, 64)) * 256
            src, dst = pick(rng, nodes[:8]), pick(rng, nodes[8:])
            pct = done[slot] = min(100, done.get(slot, 0) + int(rng.integers(3, 15)))
            keys = int(rng.integers(8000, 30000))
            p2.append(
                line(
                    "I",
                    "migrate.go:88",
                    f"slots {slot}-{slot + 255} {src}->{dst}: {keys} keys {pct}% done",
                )
            )
        elif r < 0.7:
            dst = pick(rng, nodes[8:])
            lag = lognorm_ms(rng, 600, 0.8)
            p2.append(line("W", "replicate.go:140", f"replica {dst} lag {lag}ms"))
        elif r < 0.85:
            shard = int(rng.integers(0, 16))
            n = pick(rng, [512, 1024, 2048, 4096])
            p2.append(line("E", "evict.go:77", f"shard {shard} over limit, evicted {n} keys"))
        elif r < 0.96:
            src = pick(rng, nodes[:8])
            conns = int(rng.integers(20, 400))
            p2.append(line("I", "handoff.go:52", f"{src} drained {conns} client connections"))
        else:
            epoch += 1
            p2.append(line("I", "ring.go:19", f"ring epoch {epoch} committed"))
    return [("serving", p1), ("resharding", p2)]


SYSTEMS: list[tuple[str, str, str, Callable[[np.random.Generator], list[Phase]]]] = [
    ("brisquet", "payment gateway", "key=value, ISO 8601 UTC", brisquet),
    ("tarnwheel", "job scheduler", "BSD syslog", tarnwheel),
    ("fenmeter", "cold-room sensor hub", "JSON lines, epoch seconds", fenmeter),
    ("siltcache", "cache tier", "glog-style", siltcache),
]


def generate(seed: int, out: Path) -> None:
    """Write logs, labels and phases under out."""
    logs = out / "logs"
    logs.mkdir(parents=True, exist_ok=True)
    for old in logs.glob("*.log"):
        old.unlink()
    labels = ["file\tsystem\tkind\tformat\tlines"]
    phases = ["file\tphase\tfirst_line\tlast_line"]
    streams = np.random.SeedSequence(seed).spawn(len(SYSTEMS))
    for (name, kind, fmt, make), stream in zip(SYSTEMS, streams, strict=True):
        parts = make(np.random.default_rng(stream))
        file = f"logs/{name}.log"
        first = 1
        for phase, lines in parts:
            phases.append(f"{file}\t{phase}\t{first}\t{first + len(lines) - 1}")
            first += len(lines)
        text = "\n".join(line for _, lines in parts for line in lines) + "\n"
        (out / file).write_text(text, encoding="utf-8", newline="\n")
        labels.append(f"{file}\t{name}\t{kind}\t{fmt}\t{first - 1}")
    (out / "labels.tsv").write_text("\n".join(labels) + "\n", encoding="utf-8", newline="\n")
    (out / "phases.tsv").write_text("\n".join(phases) + "\n", encoding="utf-8", newline="\n")
    print(f"{len(SYSTEMS)} logs -> {out}")


def main() -> None:
    """Command-line entry point."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=DEFAULT_SEED, help="random seed")
    parser.add_argument(
        "--out", type=Path, default=Path(__file__).resolve().parent, help="output folder"
    )
    args = parser.parse_args()
    generate(args.seed, args.out)


if __name__ == "__main__":
    main()
