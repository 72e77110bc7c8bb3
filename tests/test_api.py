"""The facade core.api names every public call once, and each resolves to its stage."""

from __future__ import annotations

import importlib
import subprocess
import sys

import core.api as api


def test_every_public_name_resolves_to_the_defining_module():
    for name, module in api._PUBLIC.items():
        value = getattr(api, name)
        assert value is getattr(importlib.import_module(module), name), name


def test_unknown_name_is_an_attribute_error():
    try:
        api.no_such_call  # noqa: B018
    except AttributeError as err:
        assert "no_such_call" in str(err)
    else:
        raise AssertionError("expected AttributeError")


def test_importing_the_facade_loads_no_stage():
    """Importing core.api is free: the propagators and scipy load only when used."""
    code = ("import sys, core.api\n"
            "print(sorted(m for m in sys.modules if m.startswith(('core.', 'scipy', 'sgp4'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert out.stdout.strip() == "['core.api']", out.stdout + out.stderr
