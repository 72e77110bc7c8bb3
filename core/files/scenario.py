"""Scenario files: reading a scenario TOML file with line numbers for every problem, and
writing it back atomically with relative file names kept relative.

The validated content (rules, dataclasses, checks) lives in :mod:`core.plan.spec`; this
module is the edge where text becomes a :class:`~core.plan.spec.Scenario` and back.
"""

from __future__ import annotations

import os
import re
import tomllib
from dataclasses import replace
from pathlib import Path

from ..ground.bounded_read import TEXT_FILE_LIMIT_BYTES, read_bytes_bounded
from ..ground.errors import ScenarioError
from ..ground.filecheck import file_problem
from ..plan.spec import Scenario, ScenarioValidationError, _build, _Locator, salvage_scenario
from .atomic import write_text_atomic


def load_scenario(path: str | os.PathLike[str], *, check_files: bool = True) -> Scenario:
    """Read and validate a scenario file.

    With ``check_files`` (default) a missing orbit or mapping file is one more problem.
    Raises :class:`ScenarioError` (a :class:`ScenarioValidationError` for bad fields).
    """
    p = Path(path)
    file = str(p)
    raw = read_bytes_bounded(path, limit_bytes=TEXT_FILE_LIMIT_BYTES, what="scenario file",
                             error_type=ScenarioError)
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ScenarioError(f"the file is not UTF-8 text (byte {exc.start})", file=file) from None
    try:
        d = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        m = re.search(r"line (\d+)", str(exc))
        raise ScenarioError(f"not valid TOML: {exc}", file=file,
                            line=int(m.group(1)) if m else None) from None
    except RecursionError:
        # tomllib parses nested arrays and tables recursively: thousands of '[' or '{'
        # exhaust the interpreter's stack. No scenario nests more than two levels.
        raise ScenarioError("not valid TOML: arrays or tables nested too deeply (a scenario "
                            "nests at most two levels)", file=file) from None
    sc = _build(d, base_dir=p.resolve().parent, path=p, text=text)
    if check_files:
        loc = _Locator(text)
        problems = []
        for f, resolved in zip(sc.orbits.files, sc.resolved_orbit_files()):
            why = file_problem(resolved)
            if why is not None:
                problems.append(ScenarioError(f"orbit file '{f}' {why} (looked for {resolved})",
                                              file=file, line=loc.line_of("orbits.files"),
                                              field="orbits.files"))
        m_path = sc.resolved_mapping()
        why = None if m_path is None else file_problem(m_path)
        if why is not None:
            problems.append(ScenarioError(f"mapping file '{sc.orbits.mapping}' {why} "
                                          f"(looked for {m_path})", file=file,
                                          line=loc.line_of("orbits.mapping"), field="orbits.mapping"))
        if problems:
            raise ScenarioValidationError(problems, file=file)
    return sc


def load_scenario_for_editing(path: str | os.PathLike[str]) -> tuple[Scenario, list[ScenarioError]]:
    """For the window: the scenario with every good value, and the problems of the bad ones.

    A file that reads and parses but holds bad values gives the salvaged scenario
    (:func:`core.plan.spec.salvage_scenario`) with the problems to mark at their fields;
    a file that cannot be read or is not TOML raises as :func:`load_scenario` does.
    """
    try:
        return load_scenario(path), []
    except ScenarioValidationError as err:
        problems = err.problems
    p = Path(path)
    text = p.read_bytes().decode("utf-8-sig")
    sc = salvage_scenario(tomllib.loads(text), problems, base_dir=p.resolve().parent, path=p)
    return replace(sc, locator=_Locator(text)), problems


def _rebase(name: str, old_dir: Path, new_dir: Path) -> str:
    """A relative orbit file name re-expressed for a scenario saved in another folder."""
    p = Path(name).expanduser()
    if p.is_absolute():
        return name
    if Path(old_dir).resolve() == Path(new_dir).resolve():
        return name
    target = (Path(old_dir) / p).resolve()
    try:
        return Path(os.path.relpath(target, Path(new_dir).resolve())).as_posix()
    except ValueError:            # another drive (Windows)
        return str(target)


def scenario_to_toml(scenario: Scenario) -> str:
    """The TOML text :func:`save_scenario` writes."""
    import tomli_w  # only when writing: a plan never needs it

    head = ("# acqplan scenario. Keys, units and allowed ranges: docs/scenario-keys.md\n"
            "# Relative file names are relative to this file's folder.\n\n")
    return head + tomli_w.dumps(scenario.to_dict())


def save_scenario(scenario: Scenario, path: str | os.PathLike[str]) -> Scenario:
    """Write the scenario atomically (temporary file in the same folder, then rename).

    Relative orbit file names are rewritten so they still point at the same files from
    the new folder. Returns the scenario as saved (``path`` and ``base_dir`` updated).
    """
    p = Path(path)
    folder = p.resolve().parent
    orbits = replace(scenario.orbits,
                     files=tuple(_rebase(f, scenario.base_dir, folder) for f in scenario.orbits.files),
                     mapping=(None if scenario.orbits.mapping is None
                              else _rebase(scenario.orbits.mapping, scenario.base_dir, folder)))
    route = scenario.route
    if route is not None:             # the drive's files, likewise
        def moved(name):
            return None if name is None else _rebase(name, scenario.base_dir, folder)
        route = replace(route, file=moved(route.file), horizon_file=moved(route.horizon_file),
                        stretches=tuple(replace(st, horizon_file=moved(st.horizon_file))
                                        for st in route.stretches))
    saved = replace(scenario, orbits=orbits, route=route, path=p, base_dir=folder)
    text = scenario_to_toml(saved)
    write_text_atomic(p, text, ScenarioError, "save the scenario")
    return replace(saved, locator=_Locator(text))


__all__ = ["load_scenario", "load_scenario_for_editing", "save_scenario", "scenario_to_toml"]
