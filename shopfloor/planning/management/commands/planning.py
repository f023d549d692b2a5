"""`manage.py planning validate ...` (the engine on a textbook queue) and
`manage.py planning run` (forecast the floor now)."""

from __future__ import annotations

import json
from typing import Any

from django.core.management.base import BaseCommand, CommandError, CommandParser

from shopfloor.core.planning import queueing
from shopfloor.planning import services
from shopfloor.planning.models import ForecastRun


class Command(BaseCommand):
    help = (
        "Finish forecasts. 'validate' runs the simulation on an M/M/c queue and prints its "
        "averages (compare with the Erlang C formula); 'run' forecasts the floor now."
    )

    def add_arguments(self, parser: CommandParser) -> None:
        sub = parser.add_subparsers(dest="action", required=True)
        v = sub.add_parser("validate", help="simulate a textbook queue")
        v.add_argument("--model", choices=["mmc"], default="mmc")
        v.add_argument("--arrival-rate", type=float, required=True, help="lambda per time unit")
        v.add_argument("--service-rate", type=float, required=True, help="mu per server")
        v.add_argument("--servers", type=int, default=1, help="c, parallel servers")
        v.add_argument("--jobs", type=int, default=10000, help="jobs per replication")
        v.add_argument("--replications", type=int, default=10)
        v.add_argument("--seed", type=int, default=1)
        v.add_argument("--format", choices=["json", "text"], default="text")
        r = sub.add_parser("run", help="forecast the floor now and store it")
        r.add_argument("--replications", type=int, default=None)
        r.add_argument("--seed", type=int, default=None)

    def handle(self, *args: Any, **options: Any) -> None:
        if options["action"] == "validate":
            self._validate(options)
        else:
            self._run(options)

    def _validate(self, o: dict[str, Any]) -> None:
        if not 1 <= o["replications"] <= 1000:
            raise CommandError("--replications must be 1 to 1000")
        if not 20 <= o["jobs"] <= 10_000_000:
            raise CommandError("--jobs must be 20 to 10,000,000")
        try:
            r = queueing.simulate_line(
                o["arrival_rate"],
                [o["service_rate"]],
                [o["servers"]],
                jobs=o["jobs"],
                seed=o["seed"],
                replications=o["replications"],
            )
        except ValueError as exc:
            raise CommandError(str(exc)) from exc
        out = {
            "mean_time_in_system": r.mean_time_in_system,
            "mean_in_queue": r.mean_in_queue,
            "utilisation": r.utilisation,
            "replications": r.replications,
        }
        if o["format"] == "json":
            self.stdout.write(json.dumps(out))
            return
        lam, mu, c = o["arrival_rate"], o["service_rate"], o["servers"]
        self.stdout.write(
            f"M/M/{c}, lambda {lam}, mu {mu}: {r.replications} replications of {o['jobs']} jobs\n"
            f"  time in system {r.mean_time_in_system:.4f} +/- {r.se_time_in_system:.4f} "
            f"(Erlang C: {queueing.mmc_time_in_system(c, lam, mu):.4f})\n"
            f"  wait in queue  {r.mean_in_queue:.4f} +/- {r.se_in_queue:.4f} "
            f"(Erlang C: {queueing.mmc_wait_in_queue(c, lam, mu):.4f})\n"
            f"  utilisation    {r.utilisation:.4f} (lambda / c mu: {lam / (c * mu):.4f})"
        )

    def _run(self, o: dict[str, Any]) -> None:

        run = services.run_forecast(
            ForecastRun.Trigger.COMMAND, replications=o["replications"], seed=o["seed"]
        )
        if run is None:
            raise CommandError("another forecast run is in progress; try again in a minute")
        self.stdout.write(
            f"forecast {run.pk}: {run.lot_count} lots, {run.job_count} jobs, "
            f"{run.replications} replications, {run.seconds:.2f} s"
        )
