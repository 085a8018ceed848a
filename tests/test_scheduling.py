"""The shipped scheduling examples call the real command with options it accepts."""
from __future__ import annotations

import configparser
import shlex
from pathlib import Path

from optimizer.cli import build_parser
from optimizer.jobs import EXIT_WARNINGS

HERE = Path(__file__).resolve().parents[1] / "configs" / "scheduling"


def _parses(command: str):
    words = shlex.split(command)
    exe = next(i for i, w in enumerate(words) if w.endswith("beltwave"))
    return build_parser().parse_args(words[exe + 1:])


def test_cron_example_runs_the_nightly_job_with_valid_options():
    lines = [l for l in (HERE / "beltwave-nightly.cron").read_text().splitlines() if l and not l.startswith("#")]
    assert len(lines) == 1
    fields = lines[0].split(None, 5)
    assert fields[:5] == ["30", "2", "*", "*", "*"]
    command = fields[5].split("&&")[1].split(">>")[0]
    args = _parses(command)
    assert args.command == "nightly" and args.config == "/etc/beltwave/plant.toml"


def test_systemd_unit_and_timer_agree_with_the_exit_codes():
    unit = configparser.ConfigParser(strict=False)
    unit.read(HERE / "beltwave-nightly.service")
    args = _parses(unit["Service"]["ExecStart"])
    assert args.command == "nightly"
    assert unit["Service"]["Type"] == "oneshot"
    assert unit["Service"]["SuccessExitStatus"] == str(EXIT_WARNINGS)
    timer = configparser.ConfigParser(strict=False)
    timer.read(HERE / "beltwave-nightly.timer")
    assert timer["Timer"]["OnCalendar"] == "*-*-* 02:30:00"
    assert timer["Install"]["WantedBy"] == "timers.target"
