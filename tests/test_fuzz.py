"""A mutation fuzz of every bundled file through every command, in worker processes.

Each input is a bundled file with one key set to a wrong type, zero, its negative, a tiny or
denormal number, 1e308, int64 max, NaN or infinity, ×1e6 or ×1e-6, or deleted; or a key
replaced by deeply nested arrays; or the whole file replaced by garbage. It runs through the
command line's entry point (``bandpert.cli.app.main``, the function the ``bandpert`` script
calls, so its error-to-exit-status map and its all-or-nothing output staging are exercised)
with small settings, in one of :data:`WORKERS` forked worker processes (no interpreter start
per input), and must:

- exit 0 or 2 (3 is allowed for ``sweep``, whose failed points are reported and kept);
- print no traceback, and on exit 2 exactly one ``bandpert: error:`` line naming the file,
  every value in it at most :data:`bandpert.errors.MAX_ECHO` characters;
- print and write no non-finite number when it succeeds;
- leave no output at all when it fails, and the complete set when it succeeds;
- finish within :data:`TIME_BUDGET_S` seconds of CPU time (the process's, all threads: a
  machine busy with other work does not count against a run);
- keep each worker's peak memory under :data:`MEMORY_BOUND_GIB` (an address-space limit makes
  a runaway allocation fail as an error instead of exhausting the machine).

Heterostructure files run through ``subbands`` (eight bands, with the in-plane dispersion);
bowing files as the barriers of a fixed GaAs well (:data:`ALLOY_WELL`) through ``subbands``; a
targets file of the fuzz's own through ``fit`` on bundled silicon.

The CI size is :data:`DEFAULT_EXAMPLES` inputs (hypothesis, derandomized: the same inputs on
every run). ``BANDPERT_FUZZ_EXAMPLES=20000 pytest -m fuzz`` runs the longer mode. The counts are
printed at the end of the run.
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import math
import multiprocessing
import os
import re
import resource
import shutil
import signal
import tempfile
import time
from collections import Counter
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bandpert.cli.app import main
from bandpert.data import MATERIALS_DIR
from bandpert.errors import MAX_ECHO, MAX_PROBLEM
from bandpert.input.reader import read_toml_document

MATERIALS = MATERIALS_DIR
DEFAULT_EXAMPLES = 2000
EXAMPLES = int(os.environ.get("BANDPERT_FUZZ_EXAMPLES", DEFAULT_EXAMPLES))
#: CPU seconds after which a run counts as a hang. The heaviest legitimate input drawn is `gaps`
#: on germanium-fitted with one atom moved off its site: the lowered symmetry leaves 3629
#: irreducible points of the 24³ Fermi-level mesh, each a 218 × 218 spinor diagonalisation
#: (4 ms) and its H(k) build (3 ms): 23 s idle, 28.6 s in CI beside the second worker. The
#: budget was 30 s, then 45 s. Since germanium-fitted's l = 0 depth follows the energy, each
#: H(k) also takes the metric S^{-1/2} (about 3 ms more at the fuzz's 100 eV, where the
#: matrices are small and the products cost what the diagonalisation does): 41.9 s in CI. The
#: budget is 60 s, so that this run is not counted as a hang, while a runaway loop still is.
TIME_BUDGET_S = 60
#: Worker processes running the inputs (each input runs in one, through the CLI's entry point).
WORKERS = int(os.environ.get("BANDPERT_FUZZ_WORKERS", min(2, os.cpu_count() or 1)))
#: Peak resident memory allowed for each worker process, GiB.
MEMORY_BOUND_GIB = 3.0
INT64_MAX = 2**63 - 1

FILES = {f"{p.parent.name}-{p.name}": read_toml_document(p)
         for p in sorted([*MATERIALS.glob("*/*.toml"), *MATERIALS.glob("kp/alloys/*.toml")])}
KP_FILES = {n for n, d in FILES.items() if "parameters" in d}
#: Heterostructure files (run through ``subbands``) and bowing files (an alloy layer of a fixed
#: structure, :data:`ALLOY_WELL`, run through ``subbands``).
STRUCTURE_FILES = {n for n in FILES if n.startswith("structures-")}
ALLOY_FILES = {n for n in FILES if n.startswith("alloys-")}
#: A targets file of the fuzz's own for ``fit`` (on bundled silicon; one parameter, two energy
#: targets, a small basis: an accepted input fits in about a second).
FILES["targets-silicon.toml"] = {
    "parameters": ["potential.symmetric[0]"], "cutoff_eV": 45.0,
    "targets": [{"quantity": "energy", "at": "X:c1", "value": 1.2, "tolerance": 0.05,
                 "source": "the fuzz's own"},
                {"quantity": "energy", "at": "Γ:c1", "from": "Γ:v4", "value": 3.4,
                 "tolerance": 0.05, "source": "the fuzz's own"}]}
TARGET_FILES = {"targets-silicon.toml"}
#: The structure an alloy file is tried in: the mutated file as the barrier of a GaAs well.
ALLOY_WELL = ('name = "fuzz well"\nsource = "the fuzz\'s own"\n[[layers]]\nalloy = "{alloy}"\n'
              'x = 0.3\nthickness_nm = 4\n[[layers]]\nmaterial = "gallium-arsenide"\n'
              'thickness_nm = 4\n[[layers]]\nalloy = "{alloy}"\nx = 0.3\nthickness_nm = 4\n')

#: Small settings per command, so that a run that is accepted finishes quickly.
SMALL = {
    "check": [],
    "bands": ["--k-points", "6", "--radius-points", "2"],
    "gaps": ["--k-points", "6"],
    "masses": [],
    "fullzone": ["--k-points", "6", "--basis", "10"],
    "dos": ["--mesh", "3", "--engine", "serial", "--step-meV", "50"],
    "sweep": ["--k-points", "6", "--engine", "serial", "--quantity", "edges"],
    "kp": [],
    "optics": ["--mesh", "4", "--step-meV", "50"],
    "subbands": ["--spacing-nm", "0.5", "--levels", "2", "--model", "eight-band"],
    "fit": [],
}
#: The structure files also ask for the in-plane dispersion (two k∥ per direction, serial).
IN_PLANE = ["--in-plane", "0.02", "--k-points", "2", "--engine", "serial"]
PLANE_WAVE_COMMANDS = ("check", "bands", "gaps", "masses", "fullzone", "dos", "sweep", "optics")
OUTPUTS = {"bands": 3, "gaps": 2, "masses": 1, "fullzone": 2, "dos": 3, "sweep": 3, "kp": 2,
           "check": 0, "optics": 3, "subbands": 3, "fit": 2}


class Hang(BaseException):
    """Raised by the timer when a run exceeds its budget (not an Exception: nothing catches
    it on the way out)."""


def _on_alarm(signum, frame):
    raise Hang


# ---------------------------------------------------------------------------------------------
# documents, their keys and a TOML writer
# ---------------------------------------------------------------------------------------------

def _paths(node, prefix=()):
    """Every key path of a document (tables, arrays and their entries)."""
    if isinstance(node, dict):
        for k, v in node.items():
            yield (*prefix, k)
            yield from _paths(v, (*prefix, k))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield (*prefix, i)
            yield from _paths(v, (*prefix, i))


PATHS = {name: list(_paths(doc)) for name, doc in FILES.items()}
DEEP = "__deep__"


def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        if v.startswith(DEEP):
            n = int(v[len(DEEP):])
            return "[" * n + "]" * n
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k, ensure_ascii=False)} = {_value(x)}"
                               for k, x in v.items()) + "}"
    raise TypeError(v)


def to_toml(doc: dict) -> str:
    """One ``key = value`` line per top-level key (inline tables and arrays below)."""
    return "".join(f"{json.dumps(k, ensure_ascii=False)} = {_value(v)}\n" for k, v in doc.items())


def _mutations(value) -> list:
    """The replacement values tried for one key (None: delete the key)."""
    wrong_types = ["x", True, [], {}, [[1, 2], "a"]]
    common = [None, f"{DEEP}40", f"{DEEP}3000"]
    if isinstance(value, bool):
        return [*wrong_types, 0, 1.5, *common]
    if isinstance(value, (int, float)):
        return [*wrong_types, 0, 0.0, -value, 1e-300, 5e-324, 1e308, -1e308, INT64_MAX,
                -INT64_MAX, math.nan, math.inf, -math.inf, "nan", "inf", value * 1e6,
                value * 1e-6, int(value) - 1 if isinstance(value, int) else round(value),
                *common]
    if isinstance(value, str):
        return [*wrong_types[1:], 0, 1e308, "", "z" * 5000, value + "x", *common]
    return [*wrong_types, 0, 1e308, math.nan, *common]


def _mutate(doc: dict, path: tuple, replacement) -> dict:
    doc = copy.deepcopy(doc)
    node = doc
    for p in path[:-1]:
        node = node[p]
    if replacement is None:
        del node[path[-1]]
    else:
        node[path[-1]] = replacement
    return doc


#: The CI size gives every plane-wave command but ``check`` this cutoff (eV; 89 plane waves for
#: silicon, 178 spinor ones with spin–orbit coupling), so that an accepted input runs in about
#: a second and a metal of low symmetry (one atom moved: a Fermi level from 3684 k-points) in
#: a few; ``check`` and the longer mode keep the default (the file's cutoff, else the converged
#: search with its budget).
CI_CUTOFF_EV = "100"


def _argv(command: str, name: str, doc: dict, file: Path, out: Path) -> list[str]:
    if command == "fit":
        return ["fit", "silicon", str(file), "--out", str(out)]
    if name in ALLOY_FILES:  # the structure around the mutated bowing file
        well = file.with_name("well.toml")
        well.write_text(ALLOY_WELL.format(alloy=file.name), encoding="utf-8")
        return ["subbands", str(well), *SMALL["subbands"], "--out", str(out)]
    if command == "subbands":
        return ["subbands", str(file), *SMALL["subbands"], *IN_PLANE, "--out", str(out)]
    argv = [command, str(file), *SMALL[command]]
    # check runs the converged-cutoff search of files without a cutoff (its budget is fuzzed)
    if command not in ("kp", "check") and EXAMPLES <= DEFAULT_EXAMPLES and name not in KP_FILES:
        argv += ["--cutoff-eV", CI_CUTOFF_EV]
    if command != "check":
        argv += ["--out", str(out)]
    if command == "sweep":
        if name in KP_FILES:
            argv += ["--vary", "parameters.Ep_eV=20:30:2"]
        else:
            a = FILES[name]["lattice"].get("a_A", 5.0)
            argv += ["--vary", f"lattice.a_A={a}:{a * 1.01:.6g}:2"]
    return argv


# ---------------------------------------------------------------------------------------------
# one run and its checks
# ---------------------------------------------------------------------------------------------

NON_FINITE = re.compile(r"(?<![A-Za-z])(nan|inf|infinity)(?![A-Za-z])", re.IGNORECASE)


def _run(argv: list[str]) -> tuple[int, str, str, float]:
    """Exit status, stdout, stderr and CPU seconds (this process, all threads) of one run."""
    stdout, stderr = io.StringIO(), io.StringIO()
    start = time.process_time()
    signal.signal(signal.SIGPROF, _on_alarm)
    signal.setitimer(signal.ITIMER_PROF, TIME_BUDGET_S)
    try:
        with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
            main(argv)
        code = 0
    except SystemExit as done:
        code = done.code if isinstance(done.code, int) else 0
    except Hang:
        code = -1
    finally:
        signal.setitimer(signal.ITIMER_PROF, 0)
    return code, stdout.getvalue(), stderr.getvalue(), time.process_time() - start


def _check(command: str, file: Path, out: Path, code: int, stdout: str, stderr: str,
           counts: Counter, problems: list, label: str, named: tuple[Path, ...] = ()) -> None:
    """Check one run (``named``: further files an error line may name instead of ``file``,
    e.g. the structure around a mutated bowing file)."""
    counts["inputs"] += 1
    files = [p for p in out.rglob("*") if p.is_file()] if out.exists() else []
    temporary = [p for p in files if p.name.startswith(".") or ".bandpert-" in str(p)]
    if code == -1:
        counts["hangs"] += 1
        problems.append(f"hang: {label}")
        return
    counts[f"exit {code}"] += 1
    counts[f"{command} exit {code}"] += 1
    if code not in (0, 2) and not (command == "sweep" and code == 3):
        problems.append(f"exit {code}: {label}: {stderr.strip()[:300]}")
    if "Traceback" in stderr or "Traceback" in stdout:
        counts["tracebacks"] += 1
        problems.append(f"traceback: {label}")
    if code == 2:
        lines = stderr.strip().splitlines()
        if len(lines) != 1 or not lines[0].startswith("bandpert: error: "):
            counts["messages not one line"] += 1
            problems.append(f"message of {len(lines)} lines: {label}: {stderr[:300]}")
        elif (len(_without(lines[0], file, *named)) > MAX_PROBLEM + 2 * MAX_ECHO + 40
              or max(len(w) for w in _without(lines[0], file, *named).split()) > MAX_ECHO):
            counts["long messages"] += 1
            problems.append(f"message of {len(lines[0])} characters: {label}: {lines[0][:200]}")
        elif not any(str(f) in lines[0] for f in (file, *named)):
            counts["messages without the file"] += 1
            problems.append(f"message without the file name: {label}: {lines[0]}")
    if code != 0 and code != 3 and [p for p in files if p not in temporary]:
        counts["partial"] += 1
        problems.append(f"partial output after exit {code}: {label}: {[p.name for p in files]}")
    if temporary:
        counts["temporary files left"] += 1
        problems.append(f"temporary files left: {label}: {[p.name for p in temporary]}")
    if code == 0:
        if len(files) < OUTPUTS[command]:
            counts["partial"] += 1
            problems.append(f"incomplete output set: {label}: {[p.name for p in files]}")
        texts = [stdout] + [p.read_text(encoding="utf-8") for p in files
                            if p.suffix in (".csv", ".json")]
        if any(NON_FINITE.search(t) for t in texts):
            counts["non-finite"] += 1
            where = next(t for t in texts if NON_FINITE.search(t))
            m = NON_FINITE.search(where)
            problems.append(f"non-finite output: {label}: "
                            f"...{where[max(0, m.start() - 80):m.end() + 20]}...")


def _without(line: str, *files: Path) -> str:
    for f in files:
        line = line.replace(str(f), "")
    return line


def _limit_address_space(extra_gib: float) -> None:
    """Cap this process's address space at its current size + ``extra_gib`` (a worker's)."""
    _, hard = resource.getrlimit(resource.RLIMIT_AS)
    with open("/proc/self/status", encoding="ascii") as status:
        vm = next(int(line.split()[1]) * 1024 for line in status if line.startswith("VmSize"))
    limit = int(vm + extra_gib * 2**30)
    if hard != resource.RLIM_INFINITY:
        limit = min(limit, hard)
    resource.setrlimit(resource.RLIMIT_AS, (limit, hard))


def _worker_start() -> None:
    """A worker process: BLAS on one thread (as the CLI's solvers), the memory cap set."""
    for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ[name] = "1"
    _limit_address_space(MEMORY_BOUND_GIB)


def _one_case(case: tuple[int, str, str, str, str, str]) -> dict:
    """Run one input in a worker process and check it; a summary for the parent."""
    index, name, command, text, what, work = case
    folder = Path(work) / f"case-{index}"
    folder.mkdir()
    file = folder / name
    file.write_text(text, encoding="utf-8", errors="surrogateescape")
    out = folder / "out"
    code, stdout, stderr, seconds = _run(_argv(command, name, FILES[name], file, out))
    counts: Counter = Counter()
    problems: list[str] = []
    label = f"{command} {name} {what}"
    named = (file.with_name("well.toml"),) if name in ALLOY_FILES else ()
    _check(command, file, out, code, stdout, stderr, counts, problems, label, named)
    shutil.rmtree(folder, ignore_errors=True)
    return {"counts": counts, "problems": problems, "seconds": seconds, "label": label,
            "command": command, "code": code,
            "peak_gib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20}


def _inputs() -> tuple[list[tuple[str, str, str, str]], int]:
    """:data:`EXAMPLES` distinct mutated inputs (file name, command, text, what was mutated),
    drawn by hypothesis (derandomized: the same on every run); a (command, text) pair drawn
    again is counted as a repeat and replaced by a further draw."""
    cases: dict[tuple[str, str], tuple[str, str, str, str]] = {}
    repeats = [0]

    @settings(max_examples=int(EXAMPLES * 1.3) + 10, derandomize=True, database=None, deadline=None,
              suppress_health_check=list(HealthCheck))
    @given(st.data())
    def one(data):
        name = data.draw(st.sampled_from(sorted(FILES)), label="file")
        kind = data.draw(st.sampled_from(["key"] * 19 + ["garbage"]), label="kind")
        doc = FILES[name]
        if kind == "key":
            path = data.draw(st.sampled_from(PATHS[name]), label="key")
            node = doc
            for p in path:
                node = node[p]
            replacement = data.draw(st.sampled_from(_mutations(node)), label="value")
            text = to_toml(_mutate(doc, path, replacement))
            what = f"{'.'.join(map(str, path))} = {str(replacement)[:40]}"
        else:
            text = data.draw(st.one_of(
                st.text(max_size=200),
                st.binary(max_size=200).map(lambda b: b.decode("latin-1")),
                st.integers(0, 2000).map(lambda i: to_toml(doc)[:i] + "]]\x00=" +
                                         to_toml(doc)[i:])), label="garbage")
            what = "garbage text"
        commands = (("subbands",) if name in STRUCTURE_FILES | ALLOY_FILES else
                    ("fit",) if name in TARGET_FILES else
                    ("kp", "sweep") if name in KP_FILES else PLANE_WAVE_COMMANDS)
        command = data.draw(st.sampled_from(commands), label="command")
        if len(cases) >= EXAMPLES:
            return
        if (command, text) in cases:  # an identical input has the same outcome
            repeats[0] += 1
            return
        cases[(command, text)] = (name, command, text, what)

    one()
    return list(cases.values()), repeats[0]


@pytest.mark.fuzz
def test_mutated_inputs_through_every_command(capsys):
    started = time.perf_counter()
    inputs, repeats = _inputs()
    drawn = time.perf_counter() - started
    work = tempfile.mkdtemp(prefix="bandpert-fuzz-")
    counts: Counter = Counter()
    problems: list[str] = []
    per_command: Counter = Counter()
    slow: list[tuple[float, str]] = []
    peak = 0.0
    # the costly inputs first (a few metals of low symmetry take 10-25 s): the workers end
    # together instead of one finishing a long run alone
    order = sorted(range(len(inputs)), key=lambda i: inputs[i][1] in ("kp", "check"))
    cases = [(i, *inputs[i], work) for i in order]
    try:
        with ProcessPoolExecutor(WORKERS, mp_context=multiprocessing.get_context("fork"),
                                 initializer=_worker_start) as pool:
            for result in pool.map(_one_case, cases, chunksize=4):
                counts.update(result["counts"])
                problems += result["problems"]
                per_command[result["command"]] += result["seconds"]
                slow.append((result["seconds"], f"{result['label']} → {result['code']}"))
                peak = max(peak, result["peak_gib"])
    finally:
        shutil.rmtree(work, ignore_errors=True)
    elapsed = time.perf_counter() - started
    slow.sort(reverse=True)
    summary = (f"fuzz: {counts['inputs']} distinct inputs run ({repeats} repeats skipped) in "
               f"{elapsed:.0f} s on {WORKERS} worker processes (drawing them: {drawn:.0f} s; "
               f"CPU of the runs: {sum(per_command.values()):.0f} s); "
               f"exit 0: {counts['exit 0']}, exit 2: {counts['exit 2']}, exit 3 (sweep points "
               f"failed): {counts['exit 3']}, exit 1: {counts['exit 1']}, hangs (> "
               f"{TIME_BUDGET_S} s of CPU): {counts['hangs']}, non-finite: "
               f"{counts['non-finite']}, partial: {counts['partial']}, tracebacks: "
               f"{counts['tracebacks']}, messages not one line: "
               f"{counts['messages not one line']}, long: {counts['long messages']}, without "
               f"the file: {counts['messages without the file']}; peak memory of a worker "
               f"{peak:.2f} GiB (bound {MEMORY_BOUND_GIB:g})")
    with capsys.disabled():
        print("\n" + summary)
        print("CPU seconds per command: " + ", ".join(f"{c} {t:.0f}" for c, t in
                                                   per_command.most_common()))
        print("slowest (CPU): " + "; ".join(f"{t:.1f} s {what}" for t, what in slow[:8]))
        for p in problems[:40]:
            print("  " + p)
    assert counts["inputs"] == EXAMPLES
    assert not problems, f"{len(problems)} problems; first: {problems[0]}"
    assert peak < MEMORY_BOUND_GIB


# ---------------------------------------------------------------------------------------------
# inputs the fuzz found (run in the ordinary suite; each one was an internal error, exit 1, or
# a message that did not name the file at fault)
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("change,key", [
    ({"tolerance": 5e-324}, "targets[0].tolerance"),    # residuals not finite: exit 1
    ({"value": 1e308}, "targets[0].value"),
    ({"cutoff_eV": 1e-300}, "cutoff_eV"),               # one plane wave, band 5 asked: exit 1
    ({"parameters": ["potential.symmetric[0]x"]}, "parameters[0]"),  # named the material
])
def test_found_fit_targets_are_one_line_errors_naming_the_targets_file(tmp_path, change, key):
    doc = copy.deepcopy(FILES["targets-silicon.toml"])
    if "tolerance" in change or "value" in change:
        doc["targets"][0].update(change)
    else:
        doc.update(change)
    file = tmp_path / "targets.toml"
    file.write_text(to_toml(doc), encoding="utf-8")
    code, _, stderr, _ = _run(["fit", "silicon", str(file), "--out", str(tmp_path / "o")])
    assert code == 2 and len(stderr.strip().splitlines()) == 1, stderr
    # the file's own key, not a flag: `fit` has no --cutoff-eV (a key becomes a flag only when
    # the command has that flag)
    assert f"{file}: {key}: " in stderr and "--cutoff-eV" not in stderr
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize("where", ["layer", "alloy end"])
def test_found_names_too_long_for_the_file_system_are_one_line_errors(tmp_path, where):
    long = "z" * 5000
    doc = copy.deepcopy(FILES["structures-gallium-arsenide-well.toml"])
    if where == "layer":
        doc["layers"][1]["material"] = long
        file = tmp_path / "well.toml"
        file.write_text(to_toml(doc), encoding="utf-8")
    else:
        alloy = copy.deepcopy(FILES["alloys-aluminium-gallium-arsenide.toml"])
        alloy["A"] = long
        (tmp_path / "alloy.toml").write_text(to_toml(alloy), encoding="utf-8")
        file = tmp_path / "well.toml"
        file.write_text(ALLOY_WELL.format(alloy="alloy.toml"), encoding="utf-8")
    code, _, stderr, _ = _run(["subbands", str(file), "--out", str(tmp_path / "o")])
    assert code == 2 and len(stderr.strip().splitlines()) == 1, stderr
    assert "cannot be looked up" in stderr and str(file) in stderr
