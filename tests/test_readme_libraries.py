"""The README's process-library commands, run as written: each library is written, passes `modelgen check`,
and loads in ngspice with no warning (issue: the README's library example is proven in the simulator).

The commands are read from the README's section "A process library from one device" (its first sh block),
so the README cannot drift from what is tested. The physics each library stands for is proven in
tests/test_scalable.py, tests/test_corner_pick.py and tests/test_statistical.py against ngspice itself.
"""

from __future__ import annotations

import re
import shlex
import subprocess

from support import ROOT, need, run

SECTION = "## A process library from one device"


def readme_commands():
    """The lines of the section's first ```sh block, continuation lines joined, as argument lists."""
    text = (ROOT / "README.md").read_text()
    body = text[text.index(SECTION):]
    block = re.search(r"```sh\n(.*?)```", body, re.S).group(1)
    return [shlex.split(line) for line in block.replace("\\\n", " ").splitlines() if line.strip()]


def test_the_section_writes_three_libraries_and_checks_each():
    commands = readme_commands()
    assert [c[:2] for c in commands] == [["modelgen", "card"], ["modelgen", "spread"], ["modelgen", "spread"],
                                         ["modelgen", "check"], ["modelgen", "check"], ["modelgen", "check"]]
    written = [c[c.index("-o") + 1] for c in commands if "-o" in c]
    checked = [c[2] for c in commands if c[1] == "check"]
    assert written == checked == ["dsw_scalable.lib", "dsw_corners.lib", "dsw_statistical.lib"]


def test_readme_library_commands_run_as_written_and_load_in_ngspice(tmp_path, monkeypatch):
    need("ngspice")
    monkeypatch.chdir(tmp_path)
    for command in readme_commands():
        args = [str(ROOT / a) if a.startswith("examples/") else a for a in command[1:]]
        res = run(*args)
        assert res.exit_code == 0, (command, res.output)
        if command[1] == "check":
            assert re.search(r"(\d+) of \1 checks passed", res.output), res.output
    for lib, instance, section in (("dsw_scalable.lib", "X1 a 0 DSW_DEMO area=1e-9 pj=1.2e-4", None),
                                   ("dsw_corners.lib", "X1 a 0 DSW_DEMO", "vf_1ma_low"),
                                   ("dsw_corners.lib", "X1 a 0 DSW_DEMO", "ir_m5v_high"),
                                   ("dsw_statistical.lib", "X1 a 0 DSW_DEMO", None)):
        path = tmp_path / lib
        load = f".lib {path} {section}" if section else f".include {path}"
        deck = tmp_path / "load.cir"
        deck.write_text("\n".join(["* load", load, "V1 a 0 dc 0.7", instance, ".control", "op", "print i(V1)",
                                   ".endc", ".end"]) + "\n")
        done = subprocess.run(["ngspice", "-b", str(deck)], check=False, capture_output=True, text=True,
                              timeout=60)
        said = done.stdout + done.stderr
        assert "rror" not in said and "warning" not in said.lower(), (lib, said)
        current = float(re.findall(r"^i\(v1\)\s*=\s*(\S+)", done.stdout, re.MULTILINE)[0])
        assert -1.0 < current < -1e-6, (lib, current)  # forward at 0.7 V: microamperes to tens of milliamperes
