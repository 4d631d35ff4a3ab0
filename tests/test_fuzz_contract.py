"""The fuzzing harness of the input contract, bounded for ``make test``.

Runs ``tests/fuzz_contract.py`` in a child process (it caps its own address
space with ``resource.setrlimit``) on 40 derandomized generated cases; ``make
bench`` runs it on more, random ones. See that file for the contract.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

HARNESS = Path(__file__).with_name("fuzz_contract.py")


def test_generated_inputs_keep_the_contract():
    proc = subprocess.run([sys.executable, str(HARNESS), "--examples", "40", "--mem-gb", "3"],
                          cwd=HARNESS.parent, capture_output=True, text=True, timeout=300,
                          check=False)
    assert proc.returncode == 0, proc.stdout[-4000:] + proc.stderr[-4000:]
    summary = proc.stdout.strip().splitlines()[-1]
    assert summary.startswith("fuzz contract: 40 cases") and "no breach" in summary
    # both outcomes are exercised: complete runs and refused inputs
    assert " 0 exit 0" not in summary and " 0 exit 2" not in summary
