"""Material files: a table of malformed files, the bundled files, conversions, lattices, a fuzz.

Every malformed file must give one :class:`~bandpert.errors.InputError` whose one-line message
names the file and the dotted key, and the CLI must turn it into one stderr line and exit 2
without writing any output.
"""

from __future__ import annotations

import copy
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
import scipy.constants
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from bandpert.cli.app import main
from bandpert.data import MATERIALS_DIR
from bandpert.errors import InputError
from bandpert.input.material import (
    LATTICE_TYPES,
    POTENTIAL_FORMS,
    Material,
    canonical_label,
    lattice_vectors,
    load_material,
    parse_material,
)
from bandpert.input.toml_text import to_toml
from bandpert.units import ENERGY_UNITS_TO_EV

MATERIALS = MATERIALS_DIR / "planewave"
FILE_NAME = "broken-material.toml"

# ---------------------------------------------------------------------------------------------
# a valid silicon-like document and a tiny TOML writer for its mutations
# ---------------------------------------------------------------------------------------------

#: Silicon in the Cohen–Bergstresser form (a = 5.43 Å, V_S(3, 8, 11) = -0.21, 0.04, 0.08 Ry, as
#: in the bundled silicon.toml after Cohen & Bergstresser, Phys. Rev. 141, 789 (1966)), with every
#: optional table filled.
VALID: dict = {
    "name": "Silicon-like test material",
    "source": "M. L. Cohen and T. K. Bergstresser, Phys. Rev. 141, 789 (1966)",
    "note": "test document",
    "lattice": {"type": "fcc", "a_A": 5.43},
    "atoms": [
        {"species": "Si", "position": [0.125, 0.125, 0.125]},
        {"species": "Si", "position": [-0.125, -0.125, -0.125]},
    ],
    "potential": {
        "form": "symmetric-antisymmetric",
        "unit": "Ry",
        "shells": [3, 8, 11],
        "symmetric": [-0.21, 0.04, 0.08],
        "antisymmetric": [0.0, 0.0, 0.0],
    },
    "basis": {"cutoff_eV": 60.0, "bands": 8},
    "electrons": {"valence": 8},
    "path": {
        "points": {"G": [0.0, 0.0, 0.0], "X": [0.5, 0.0, 0.5], "L": [0.5, 0.5, 0.5]},
        "legs": [["L", "G", "X"]],
    },
}

PER_SPECIES = {"form": "per-species", "unit": "Ry", "shells": [3, 4, 8, 11],
               "species": {"Ga": [-0.2, 0.05, 0.0, 0.06], "As": [-0.26, -0.05, 0.01, 0.05]}}
FOURIER = {"form": "fourier", "unit": "eV",
           "coefficients": [{"miller": [1, 0, 0], "value": -0.5},
                            {"miller": [0, 1, 1], "value": [0.2, 0.1]}]}
#: The continuous form v(q) = a1 (q² − a2)/(a3 exp(a4 q²) − 1) (Friedel, Hybertsen & Schlüter,
#: Phys. Rev. B 39, 7974 (1989); form from memory) with bandpert's fit to silicon, rounded.
CONTINUOUS = {"form": "continuous", "unit": "eV", "reference_volume_A3": 20.0,
              "taper_invA": [3.88, 3.97],
              "species": {"Si": {"a1": 11.48, "a2_invA2": 8.80, "a3": 13.16, "a4_A2": 0.107}}}
OBLIQUE = {"type": "oblique", "a_A": 3.0, "b_A": 3.5, "gamma_deg": 75.0}
ATOMS_2D = [{"species": "X", "position": [0.0, 0.0]}]

def test_writer_round_trips_the_valid_document():
    assert tomllib.loads(to_toml(VALID)) == VALID
    parse_material(copy.deepcopy(VALID), "valid.toml")


def test_valid_variants_load():
    """The bases the table mutates are themselves valid."""
    for changes in ({"potential": PER_SPECIES, "atoms": [
                        {"species": "Ga", "position": [0.125, 0.125, 0.125]},
                        {"species": "As", "position": [-0.125, -0.125, -0.125]}]},
                    {"potential": FOURIER},
                    {"potential": CONTINUOUS},
                    {"lattice": OBLIQUE, "atoms": ATOMS_2D, "path": None,
                     "potential": {"form": "empty"}}):
        doc = copy.deepcopy(VALID)
        for k, v in changes.items():
            if v is None:
                doc.pop(k)
            else:
                doc[k] = copy.deepcopy(v)
        assert isinstance(parse_material(doc, "x.toml"), Material)


# ---------------------------------------------------------------------------------------------
# mutations
# ---------------------------------------------------------------------------------------------

def _walk(doc, path):
    node = doc
    for p in path[:-1]:
        node = node[p]
    return node, path[-1]


def drop(*path):
    def f(doc):
        node, last = _walk(doc, path)
        del node[last]
    return f


def put(*path_and_value):
    *path, value = path_and_value

    def f(doc):
        node, last = _walk(doc, path)
        node[last] = copy.deepcopy(value)
    return f


def both(*mutations):
    def f(doc):
        for m in mutations:
            m(doc)
    return f


def two_d(*more):
    """Replace the crystal by a 2D oblique one (no custom path), then apply ``more``."""
    return both(put("lattice", OBLIQUE), put("atoms", ATOMS_2D), drop("path"),
                put("potential", {"form": "empty"}), *more)


def as_fourier(*more):
    return both(put("potential", FOURIER), *more)


def as_vectors(vectors):
    return put("lattice", {"type": "vectors", "vectors_A": vectors})


GAAS_ATOMS = [{"species": "Ga", "position": [0.125, 0.125, 0.125]},
              {"species": "As", "position": [-0.125, -0.125, -0.125]}]

#: (id, mutation of VALID, dotted key the message must name; None: a file-level error)
CASES = [
    # --- missing required keys
    ("missing-name", drop("name"), "name"),
    ("missing-source", drop("source"), "source"),
    ("missing-lattice", drop("lattice"), "lattice"),
    ("missing-lattice-type", drop("lattice", "type"), "lattice.type"),
    ("missing-a", drop("lattice", "a_A"), "lattice.a_A"),
    ("missing-atoms", drop("atoms"), "atoms"),
    ("missing-species", drop("atoms", 1, "species"), "atoms[1].species"),
    ("missing-position", drop("atoms", 0, "position"), "atoms[0].position"),
    ("missing-potential", drop("potential"), "potential"),
    ("missing-form", drop("potential", "form"), "potential.form"),
    ("missing-unit", drop("potential", "unit"), "potential.unit"),
    ("missing-shells", drop("potential", "shells"), "potential.shells"),
    ("missing-symmetric", drop("potential", "symmetric"), "potential.symmetric"),
    ("missing-valence", put("electrons", {}), "electrons.valence"),
    ("missing-legs", drop("path", "legs"), "path.legs"),
    ("missing-points", drop("path", "points"), "path.points"),
    ("missing-fourier-value", as_fourier(drop("potential", "coefficients", 0, "value")),
     "potential.coefficients[0].value"),
    ("missing-oblique-gamma", two_d(drop("lattice", "gamma_deg")), "lattice.gamma_deg"),
    ("empty-name", put("name", "  "), "name"),
    ("empty-source", put("source", ""), "source"),
    # --- unknown keys at every level
    ("unknown-top", put("colour", "blue"), "colour"),
    ("unknown-lattice", put("lattice", "c_A", 5.0), "lattice.c_A"),
    ("unknown-atom", put("atoms", 1, "mass", 28.0), "atoms[1].mass"),
    ("unknown-potential", put("potential", "scale", 1.0), "potential.scale"),
    ("unknown-basis", put("basis", "ecut", 10.0), "basis.ecut"),
    ("unknown-electrons", put("electrons", "spin", 0), "electrons.spin"),
    ("unknown-path", put("path", "labels", ["G"]), "path.labels"),
    ("unknown-coefficient-key", as_fourier(put("potential", "coefficients", 0, "g", 1)),
     "potential.coefficients[0].g"),
    ("unknown-species", both(put("potential", PER_SPECIES), put("atoms", GAAS_ATOMS),
                             put("potential", "species", "In", [0.0] * 4)),
     "potential.species.In"),
    ("unit-with-empty-form", put("potential", {"form": "empty", "unit": "eV"}), "potential.unit"),
    # --- wrong types
    ("a-as-string", put("lattice", "a_A", "5.43"), "lattice.a_A"),
    ("valence-as-boolean", put("electrons", "valence", True), "electrons.valence"),
    ("bands-as-float", put("basis", "bands", 8.0), "basis.bands"),
    ("name-as-integer", put("name", 7), "name"),
    ("lattice-as-string", put("lattice", "fcc"), "lattice"),
    ("atoms-as-table", put("atoms", {"species": "Si", "position": [0, 0, 0]}), "atoms"),
    ("atom-as-string", put("atoms", 0, "Si"), "atoms[0]"),
    ("position-as-table", put("atoms", 0, "position", {"x": 0.1}), "atoms[0].position"),
    ("position-as-strings", put("atoms", 0, "position", ["0", "0", "0"]), "atoms[0].position"),
    ("shells-as-table", put("potential", "shells", {"a": 3}), "potential.shells"),
    ("symmetric-as-number", put("potential", "symmetric", -0.21), "potential.symmetric"),
    ("unknown-lattice-type", put("lattice", "type", "diamond"), "lattice.type"),
    ("unknown-form", put("potential", "form", "ewald"), "potential.form"),
    ("legs-as-string", put("path", "legs", "L-G-X"), "path.legs"),
    # --- non-physical values
    ("negative-a", put("lattice", "a_A", -5.43), "lattice.a_A"),
    ("zero-a", put("lattice", "a_A", 0.0), "lattice.a_A"),
    ("nan-a", put("lattice", "a_A", math.nan), "lattice.a_A"),
    ("inf-a", put("lattice", "a_A", math.inf), "lattice.a_A"),
    ("a-in-metres", put("lattice", "a_A", 5.43e-10), "lattice.a_A"),
    ("huge-a", put("lattice", "a_A", 1e200), "lattice.a_A"),
    ("nan-form-factor", put("potential", "symmetric", [-0.21, math.nan, 0.08]),
     "potential.symmetric"),
    ("inf-position", put("atoms", 0, "position", [math.inf, 0.0, 0.0]), "atoms[0].position"),
    ("huge-position", put("atoms", 0, "position", [1e300, 0.0, 0.0]), "atoms[0].position"),
    ("negative-cutoff", put("basis", "cutoff_eV", -10.0), "basis.cutoff_eV"),
    ("zero-cutoff-Ry", put("basis", {"cutoff_Ry": 0.0}), "basis.cutoff_Ry"),
    ("both-cutoffs", put("basis", "cutoff_Ry", 4.0), "basis.cutoff_Ry"),
    ("Ry-cutoff-overflows", put("basis", {"cutoff_Ry": 1e308}), "basis.cutoff_Ry"),
    ("Ry-form-factor-overflows", put("potential", "symmetric", [1e308, 0.0, 0.0]),
     "potential.symmetric"),
    ("oblique-gamma-0", two_d(put("lattice", "gamma_deg", 0.0)), "lattice.gamma_deg"),
    ("oblique-gamma-180", two_d(put("lattice", "gamma_deg", 180.0)), "lattice.gamma_deg"),
    ("oblique-gamma-tiny", two_d(put("lattice", "gamma_deg", 1e-12)), "lattice.gamma_deg"),
    ("zero-valence", put("electrons", "valence", 0), "electrons.valence"),
    ("negative-valence", put("electrons", "valence", -2), "electrons.valence"),
    ("zero-bands", put("basis", "bands", 0), "basis.bands"),
    ("negative-shell", put("potential", "shells", [-3, 8, 11]), "potential.shells"),
    ("no-shells", both(put("potential", "shells", []), put("potential", "symmetric", [])),
     "potential.shells"),
    # --- wrong counts
    ("position-too-short", put("atoms", 0, "position", [0.125, 0.125]), "atoms[0].position"),
    ("position-too-long-2d", two_d(put("atoms", 0, "position", [0.0, 0.0, 0.0])),
     "atoms[0].position"),
    ("symmetric-too-short", put("potential", "symmetric", [-0.21, 0.04]), "potential.symmetric"),
    ("antisymmetric-too-long", put("potential", "antisymmetric", [0.0] * 4),
     "potential.antisymmetric"),
    ("species-list-too-short", both(put("potential", PER_SPECIES), put("atoms", GAAS_ATOMS),
                                    put("potential", "species", "Ga", [0.0])),
     "potential.species.Ga"),
    ("symmetric-antisymmetric-1-atom", put("atoms", [VALID["atoms"][0]]), "potential.form"),
    ("symmetric-antisymmetric-3-atoms",
     put("atoms", VALID["atoms"] + [{"species": "Si", "position": [0.5, 0.5, 0.5]}]),
     "potential.form"),
    ("no-atoms", put("atoms", []), "atoms"),
    ("path-point-too-short", put("path", "points", "X", [0.5, 0.0]), "path.points.X"),
    # --- overlapping atoms
    ("same-position", put("atoms", 1, "position", [0.125, 0.125, 0.125]), "atoms[1].position"),
    ("overlap-through-image", both(put("atoms", 0, "position", [0.0, 0.0, 0.0]),
                                   put("atoms", 1, "position", [1.0, 0.0, 0.0])),
     "atoms[1].position"),
    ("overlap-through-far-image", both(put("atoms", 0, "position", [0.0, 0.0, 0.0]),
                                       put("atoms", 1, "position", [0.01, -1.0, 2.0])),
     "atoms[1].position"),
    ("nearly-same-position", put("atoms", 1, "position", [0.13, 0.125, 0.125]),
     "atoms[1].position"),
    # a 10° oblique cell: (0.49, 0.49) rounds to itself, 2.9 Å from the origin, but its image
    # (-0.51, 0.49) is 0.27 Å away
    ("overlap-through-skewed-image",
     two_d(put("lattice", {"type": "oblique", "a_A": 3.0, "b_A": 3.0, "gamma_deg": 10.0}),
           put("atoms", [{"species": "X", "position": [0.0, 0.0]},
                         {"species": "X", "position": [0.49, 0.49]}])),
     "atoms[1].position"),
    # --- lattice vectors
    ("singular-vectors", as_vectors([[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.0, 1.0, 0.0]]),
     "lattice.vectors_A"),
    ("left-handed-vectors", as_vectors([[0.0, 2.7, 2.7], [2.7, 0.0, 2.7], [2.7, 2.7, 0.0]][::-1]),
     "lattice.vectors_A"),
    ("vector-wrong-length", as_vectors([[5.0, 0.0, 0.0], [0.0, 5.0], [0.0, 0.0, 5.0]]),
     "lattice.vectors_A"),
    ("four-vectors", as_vectors([[5.0, 0, 0, 0]] * 4), "lattice.vectors_A"),
    ("vectors-as-number", as_vectors(5.0), "lattice.vectors_A"),
    # --- Fourier coefficients
    ("non-hermitian", as_fourier(put("potential", "coefficients", 1,
                                     {"miller": [-1, 0, 0], "value": -0.4})),
     "potential.coefficients[1]"),
    ("non-hermitian-complex", as_fourier(put("potential", "coefficients", 0,
                                             {"miller": [0, -1, -1], "value": [0.2, 0.1]})),
     "potential.coefficients[1]"),
    ("complex-V0", as_fourier(put("potential", "coefficients", 0,
                                  {"miller": [0, 0, 0], "value": [1.0, 0.5]})),
     "potential.coefficients[0].value"),
    ("duplicate-miller", as_fourier(put("potential", "coefficients", 1,
                                        {"miller": [1, 0, 0], "value": -0.5})),
     "potential.coefficients[1].miller"),
    ("miller-too-short", as_fourier(put("potential", "coefficients", 0, "miller", [1, 0])),
     "potential.coefficients[0].miller"),
    ("miller-non-integer", as_fourier(put("potential", "coefficients", 0, "miller",
                                          [1.5, 0, 0])),
     "potential.coefficients[0].miller"),
    ("miller-boolean", as_fourier(put("potential", "coefficients", 0, "miller",
                                      [True, 0, 0])),
     "potential.coefficients[0].miller"),
    ("miller-huge", as_fourier(put("potential", "coefficients", 0, "miller", [2**62, 0, 0])),
     "potential.coefficients[0].miller"),
    ("value-as-string", as_fourier(put("potential", "coefficients", 0, "value", "-0.5")),
     "potential.coefficients[0].value"),
    ("value-three-numbers", as_fourier(put("potential", "coefficients", 1, "value", [1, 2, 3])),
     "potential.coefficients[1].value"),
    ("no-coefficients", as_fourier(put("potential", "coefficients", [])),
     "potential.coefficients"),
    # --- per-species, shells, units
    ("species-missing", both(put("potential", PER_SPECIES), put("atoms", GAAS_ATOMS),
                             drop("potential", "species", "As")), "potential.species.As"),
    ("species-table-missing", both(put("potential", PER_SPECIES), put("atoms", GAAS_ATOMS),
                                   drop("potential", "species")), "potential.species"),
    ("duplicate-shell", put("potential", "shells", [3, 3, 11]), "potential.shells"),
    ("nearly-duplicate-shell", put("potential", "shells", [3, 3.0000000001, 11]),
     "potential.shells"),
    ("continuous-species-table-missing", both(put("potential", CONTINUOUS),
                                              drop("potential", "species")),
     "potential.species"),
    ("continuous-a4-negative", both(put("potential", CONTINUOUS),
                                    put("potential", "species", "Si", "a4_A2", -0.1)),
     "potential.species.Si.a4_A2"),
    ("continuous-zero-denominator", both(put("potential", CONTINUOUS),
                                         put("potential", "species", "Si", "a3", 0.5)),
     "potential.species.Si.a3"),
    ("continuous-taper-reversed", both(put("potential", CONTINUOUS),
                                       put("potential", "taper_invA", [4.0, 3.0])),
     "potential.taper_invA"),
    ("continuous-unknown-key", both(put("potential", CONTINUOUS),
                                    put("potential", "species", "Si", "a5", 1.0)),
     "potential.species.Si.a5"),
    ("unknown-unit", put("potential", "unit", "meV"), "potential.unit"),
    ("unit-wrong-case", put("potential", "unit", "ry"), "potential.unit"),
    # --- custom path
    ("label-not-in-points", put("path", "legs", [["L", "G", "K"]]), "path.legs[0]"),
    ("repeated-label", put("path", "legs", [["L", "G", "G", "X"]]), "path.legs[0]"),
    ("repeated-label-alias", put("path", "legs", [["L", "G", "Gamma", "X"]]), "path.legs[0]"),
    ("empty-leg", put("path", "legs", [["L", "G"], []]), "path.legs[1]"),
    ("one-label-leg", put("path", "legs", [["L"]]), "path.legs[0]"),
    ("no-legs", put("path", "legs", []), "path.legs"),
    ("gamma-given-twice", put("path", "points", "Gamma", [0.0, 0.0, 0.0]), "path.points.Gamma"),
    ("label-with-bar", put("path", "points", "U|K", [0.0, 0.0, 0.0]), 'path.points.U|K'),
]

#: File-level failures: (id, bytes to write or None for no file)
FILE_CASES = [
    ("invalid-toml", b'name = "Si"\nsource = \n[lattice\n'),
    ("duplicate-toml-key", to_toml(VALID).encode() + b'name = "again"\n'),
    ("non-utf8", to_toml(VALID).replace("test document", "caf\u00e9").encode("latin-1")),
    ("missing-file", None),
    ("empty-file", b""),
]


def _check_message(message: str, key: str | None, path: Path) -> None:
    assert "\n" not in message and "\r" not in message
    assert path.name in message
    if key is not None:
        # the key appears as a whole dotted key, followed by the colon of "file: key: problem"
        assert f": {key}: " in message, message


def _check_cli(path: Path, tmp_path: Path, capsys) -> None:
    out_dir = tmp_path / "out"
    capsys.readouterr()
    with pytest.raises(SystemExit) as stop:
        main(["bands", str(path), "--out", str(out_dir), "--k-points", "10"])
    captured = capsys.readouterr()
    assert stop.value.code == 2, captured.err
    lines = captured.err.splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("bandpert: error:")
    assert path.name in lines[0]
    assert "Traceback" not in captured.err + captured.out
    assert not out_dir.exists() or not any(out_dir.iterdir())


@pytest.mark.parametrize(("mutate", "key"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_malformed_file_is_refused(mutate, key, tmp_path, capsys):
    doc = copy.deepcopy(VALID)
    mutate(doc)
    path = tmp_path / FILE_NAME
    path.write_text(to_toml(doc), encoding="utf-8")
    with pytest.raises(InputError) as info:
        load_material(path)
    _check_message(str(info.value), key, path)
    assert info.value.key == key
    _check_cli(path, tmp_path, capsys)


@pytest.mark.parametrize("content", [c[1] for c in FILE_CASES], ids=[c[0] for c in FILE_CASES])
def test_unreadable_file_is_refused(content, tmp_path, capsys):
    path = tmp_path / FILE_NAME
    if content is not None:
        path.write_bytes(content)
    with pytest.raises(InputError) as info:
        load_material(path)
    _check_message(str(info.value), None, path)
    _check_cli(path, tmp_path, capsys)


def test_folder_instead_of_file(tmp_path, capsys):
    path = tmp_path / FILE_NAME
    path.mkdir()
    with pytest.raises(InputError, match="folder"):
        load_material(path)
    _check_cli(path, tmp_path, capsys)


def test_byte_order_mark_is_accepted(tmp_path):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + to_toml(VALID).encode("utf-8"))
    assert load_material(path).name == VALID["name"]


def test_non_utf8_message_points_at_the_line(tmp_path):
    path = tmp_path / FILE_NAME
    path.write_bytes(b'name = "Si"\nnote = "caf\xe9"\n')
    with pytest.raises(InputError, match=r"not UTF-8 text \(invalid byte 0xe9 on line 2\)"):
        load_material(path)


def test_table_is_large_and_unique():
    assert len(CASES) + len(FILE_CASES) >= 30
    assert len({c[0] for c in CASES}) == len(CASES)


def test_non_shell_form_factor_is_refused_at_model_build(tmp_path, capsys):
    """|G|² = 5 (2π/a)² is no shell of the reciprocal of fcc, a bcc lattice (Ashcroft & Mermin,
    Solid State Physics (1976), ch. 5): |G|² = h² + k² + l² with h, k, l all odd or all even gives
    0, 3, 4, 8, 11, 12, ... (common practice, no source for the list). The loader cannot know the
    lattice's shells; the model build refuses it."""
    from bandpert.planewave.model import build_model

    doc = copy.deepcopy(VALID)
    doc["potential"]["shells"] = [3, 5, 11]
    path = tmp_path / FILE_NAME
    path.write_text(to_toml(doc), encoding="utf-8")
    material = load_material(path)
    with pytest.raises(InputError) as info:
        build_model(material, 60.0)
    _check_message(str(info.value), "potential.shells", path)
    _check_cli(path, tmp_path, capsys)
    # without a cutoff in the file the converged-cutoff search meets the same refusal
    del doc["basis"]["cutoff_eV"]
    path.write_text(to_toml(doc), encoding="utf-8")
    _check_cli(path, tmp_path, capsys)


def test_parse_material_refuses_a_non_table():
    with pytest.raises(InputError, match="expected a document"):
        parse_material([1, 2, 3], "list.toml")  # type: ignore[arg-type]


def test_messages_say_what_was_expected(tmp_path):
    doc = copy.deepcopy(VALID)
    doc["lattice"]["a_A"] = "5.43"
    with pytest.raises(InputError, match=r"expected a number, got a string \('5.43'\)"):
        parse_material(doc, "x.toml")
    doc = copy.deepcopy(VALID)
    doc["lattice"]["type"] = "diamond"
    with pytest.raises(InputError, match="not one of: chain, square"):
        parse_material(doc, "x.toml")
    doc = copy.deepcopy(VALID)
    doc["potential"]["colour"] = 1
    with pytest.raises(InputError, match=r"unknown key \(allowed here: .*shells"):
        parse_material(doc, "x.toml")


# ---------------------------------------------------------------------------------------------
# positive tests
# ---------------------------------------------------------------------------------------------

BUNDLED = sorted(p for p in MATERIALS.glob("*.toml") if not p.stem.endswith("-kp"))


def test_bundled_files_exist():
    assert len(BUNDLED) >= 6


@pytest.mark.parametrize("path", BUNDLED, ids=[p.stem for p in BUNDLED])
def test_bundled_file_loads(path):
    m = load_material(path)
    assert m.file == str(path)
    assert m.name and m.source
    assert m.lattice_type in LATTICE_TYPES and m.potential.form in POTENTIAL_FORMS
    assert m.vectors_A.shape == (m.dimension, m.dimension)
    assert m.volume_A > 0
    assert all(len(a.position_frac) == m.dimension for a in m.atoms)


def test_material_is_frozen():
    m = load_material(MATERIALS / "silicon.toml")
    with pytest.raises(AttributeError):
        m.a_A = 1.0  # type: ignore[misc]
    with pytest.raises(ValueError):
        m.vectors_A[0, 0] = 1.0


def test_rydberg_conversion_uses_codata():
    # 1 Ry = R∞ h c = 13.605693122990 eV (CODATA via scipy.constants)
    ry_ev = scipy.constants.physical_constants["Rydberg constant times hc in eV"][0]
    assert ENERGY_UNITS_TO_EV["Ry"] == ry_ev
    assert ry_ev == pytest.approx(13.6057, abs=1e-4)
    m = load_material(MATERIALS / "silicon.toml")
    assert m.potential.file_unit == "Ry"
    # silicon.toml: V_S = -0.21, 0.04, 0.08 Ry (the file's values, after Cohen & Bergstresser,
    # Phys. Rev. 141, 789 (1966))
    assert m.potential.symmetric_eV == pytest.approx([-0.21 * ry_ev, 0.04 * ry_ev, 0.08 * ry_ev],
                                                     rel=1e-15)
    assert m.potential.antisymmetric_eV == (0.0, 0.0, 0.0)
    doc = copy.deepcopy(VALID)
    doc["basis"] = {"cutoff_Ry": 5.0}
    assert parse_material(doc).cutoff_eV == pytest.approx(5.0 * ry_ev, rel=1e-15)
    doc["potential"]["unit"] = "eV"
    assert parse_material(doc).potential.symmetric_eV == (-0.21, 0.04, 0.08)


@pytest.mark.parametrize("alias", ["G", "Gamma", "GAMMA", "Γ"])
def test_gamma_aliases_become_gamma(alias):
    assert canonical_label(alias) == "Γ"
    doc = copy.deepcopy(VALID)
    doc["path"] = {"points": {alias: [0.0, 0.0, 0.0], "X": [0.5, 0.0, 0.5]},
                   "legs": [[alias, "X"], ["X", "G"]]}
    m = parse_material(doc)
    assert set(m.path.points_frac) == {"Γ", "X"}
    assert m.path.legs == (("Γ", "X"), ("X", "Γ"))
    assert canonical_label("K") == "K"


def test_loader_completes_the_conjugate_partner():
    # a real potential has V(-G) = V(G)* (common practice, no source)
    m = load_material(MATERIALS / "cosine-chain.toml")
    assert m.potential.miller == ((-1,), (1,))
    assert m.potential.fourier_eV == (1.0, 1.0)
    doc = copy.deepcopy(VALID)
    doc["potential"] = copy.deepcopy(FOURIER)
    pot = parse_material(doc).potential
    table = dict(zip(pot.miller, pot.fourier_eV, strict=True))
    assert table == {(1, 0, 0): -0.5, (-1, 0, 0): -0.5, (0, 1, 1): 0.2 + 0.1j,
                     (0, -1, -1): 0.2 - 0.1j}
    # giving both partners consistently is accepted, and V(0) stays single
    doc["potential"]["coefficients"] += [{"miller": [0, -1, -1], "value": [0.2, -0.1]},
                                         {"miller": [0, 0, 0], "value": 0.3}]
    pot = parse_material(doc).potential
    assert len(pot.miller) == 5 and dict(zip(pot.miller, pot.fourier_eV, strict=True))[
        (0, 0, 0)] == 0.3


def test_fourier_values_in_rydberg_are_converted():
    ry_ev = scipy.constants.physical_constants["Rydberg constant times hc in eV"][0]
    doc = copy.deepcopy(VALID)
    doc["potential"] = copy.deepcopy(FOURIER)
    doc["potential"]["unit"] = "Ry"
    table = dict(zip(*(lambda p: (p.miller, p.fourier_eV))(parse_material(doc).potential),
                     strict=True))
    assert table[(0, -1, -1)] == pytest.approx((0.2 - 0.1j) * ry_ev)


A = 5.43
C = 7.1


def test_fcc_vectors_and_volume():
    # fcc primitive vectors a/2 (ŷ+ẑ), a/2 (ẑ+x̂), a/2 (x̂+ŷ) and cell volume a³/4
    # (source: Ashcroft & Mermin, Solid State Physics (1976), ch. 4)
    v = lattice_vectors("fcc", A)
    assert np.allclose(v, A / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]]))
    assert np.linalg.det(v) == pytest.approx(A**3 / 4)
    assert load_material(MATERIALS / "silicon.toml").volume_A == pytest.approx(5.43**3 / 4)


def test_bcc_vectors_and_volume():
    # bcc symmetric primitive vectors a/2 (ŷ+ẑ−x̂), a/2 (ẑ+x̂−ŷ), a/2 (x̂+ŷ−ẑ) and cell volume
    # a³/2 (source: Ashcroft & Mermin, Solid State Physics (1976), ch. 4)
    v = lattice_vectors("bcc", A)
    assert np.allclose(v, A / 2 * np.array([[-1, 1, 1], [1, -1, 1], [1, 1, -1]]))
    assert np.linalg.det(v) == pytest.approx(A**3 / 2)


def test_hexagonal_vectors_and_volume():
    # cell volume (√3/2) a² c (Ashcroft & Mermin, Solid State Physics (1976), ch. 4); the
    # choice of a 120° angle between a1 and a2 is common practice, no source
    v = lattice_vectors("hexagonal", A, c=C)
    assert np.linalg.norm(v, axis=1) == pytest.approx([A, A, C])
    assert np.dot(v[0], v[1]) / A**2 == pytest.approx(-0.5)
    assert np.allclose(v[2], [0, 0, C])
    assert np.linalg.det(v) == pytest.approx(math.sqrt(3) / 2 * A**2 * C)


def test_simple_lattices():
    # areas and volumes of the simple lattices (common practice, no source)
    assert np.allclose(lattice_vectors("sc", A), A * np.eye(3))
    assert np.linalg.det(lattice_vectors("tetragonal", A, c=C)) == pytest.approx(A * A * C)
    assert np.linalg.det(lattice_vectors("orthorhombic", A, 4.0, C)) == pytest.approx(A * 4 * C)
    assert np.linalg.det(lattice_vectors("hexagonal-2d", A)) == pytest.approx(
        math.sqrt(3) / 2 * A**2)
    assert np.linalg.det(lattice_vectors("oblique", 3.0, 3.5, gamma_deg=75.0)) == pytest.approx(
        3.0 * 3.5 * math.sin(math.radians(75.0)))
    assert np.linalg.det(lattice_vectors("rectangular", 3.0, 4.0)) == pytest.approx(12.0)
    assert lattice_vectors("chain", 4.0).tolist() == [[4.0]]


def test_explicit_vectors():
    doc = copy.deepcopy(VALID)
    doc["lattice"] = {"type": "vectors", "vectors_A": lattice_vectors("fcc", A).tolist()}
    m = parse_material(doc)
    assert m.lattice_type == "vectors" and m.dimension == 3
    assert m.a_A == pytest.approx(A / math.sqrt(2))  # |a1| when a_A is not given
    doc["lattice"]["a_A"] = A
    assert parse_material(doc).a_A == A


# ---------------------------------------------------------------------------------------------
# fuzz: parse_material returns a Material or raises InputError, nothing else
# ---------------------------------------------------------------------------------------------

SCHEMA_KEYS = ["name", "source", "note", "lattice", "type", "a_A", "b_A", "c_A", "gamma_deg",
               "vectors_A", "atoms", "species", "position", "potential", "form", "unit",
               "shells", "symmetric", "antisymmetric", "coefficients", "miller", "value",
               "basis", "cutoff_eV", "cutoff_Ry", "bands", "electrons", "valence", "path",
               "points", "legs", "G", "X", "Si", "reference_volume_A3", "reference_area_A2",
               "taper_invA", "a1", "a2_invA2", "a3", "a4_A2"]
SCHEMA_STRINGS = (list(LATTICE_TYPES) + list(POTENTIAL_FORMS) + list(ENERGY_UNITS_TO_EV)
                  + ["Si", "G", "Gamma", "X", "L", ""])

keys = st.sampled_from(SCHEMA_KEYS) | st.text(max_size=6)
floats = (st.floats(allow_nan=True, allow_infinity=True)
          | st.sampled_from([0.0, -0.0, 1e-300, 1e300, 1e308, -1e308, math.nan, math.inf]))
#: integers beyond any float (OverflowError on float()) and beyond TOML's 64 bits
huge_integers = st.sampled_from([10**400, -(10**400), 2**63, -(2**63) - 1, 2**1100])
scalars = (st.booleans() | st.integers() | st.integers(min_value=-2**70, max_value=2**70)
           | huge_integers | floats | st.text(max_size=8) | st.sampled_from(SCHEMA_STRINGS)
           | st.datetimes() | st.dates() | st.none())
values = st.recursive(scalars, lambda inner: st.lists(inner, max_size=4)
                      | st.dictionaries(keys, inner, max_size=4), max_leaves=12)


def _parse_or_input_error(doc) -> None:
    try:
        result = parse_material(doc, "fuzz.toml")
    except InputError as exc:
        assert "\n" not in str(exc)
        return
    assert isinstance(result, Material)


@settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.dictionaries(keys, values, max_size=8))
def test_fuzz_random_documents(doc):
    _parse_or_input_error(doc)


def _paths(node, prefix=()):
    """Every (container, key) location in a document."""
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for k, v in items:
        yield (*prefix, k)
        if isinstance(v, (dict, list)):
            yield from _paths(v, (*prefix, k))


def _valid_like(variant: int) -> dict:
    doc = copy.deepcopy(VALID)
    if variant == 1:
        doc["potential"] = copy.deepcopy(PER_SPECIES)
        doc["atoms"] = copy.deepcopy(GAAS_ATOMS)
    elif variant == 2:
        doc["potential"] = copy.deepcopy(FOURIER)
    elif variant == 4:
        doc["potential"] = copy.deepcopy(CONTINUOUS)
    elif variant == 3:
        doc["lattice"] = copy.deepcopy(OBLIQUE)
        doc["atoms"] = copy.deepcopy(ATOMS_2D)
        del doc["path"]
        doc["potential"] = {"form": "fourier", "unit": "Ry",
                            "coefficients": [{"miller": [1, 0], "value": 0.1}]}
    return doc


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.data())
def test_fuzz_mutated_valid_documents(data):
    doc = _valid_like(data.draw(st.integers(0, 4), label="variant"))
    for _ in range(data.draw(st.integers(1, 3), label="mutations")):
        locations = list(_paths(doc))
        if not locations:
            break
        path = data.draw(st.sampled_from(locations), label="where")
        node, last = _walk(doc, path)
        action = data.draw(st.sampled_from(["drop", "replace", "add", "number"]), label="how")
        if action == "drop":
            del node[last]
        elif action == "replace":
            node[last] = data.draw(values, label="value")
        elif action == "number":
            node[last] = data.draw(floats | st.integers(min_value=-2**70, max_value=2**70)
                                   | huge_integers, label="number")
        else:
            target = node[last] if isinstance(node[last], (dict, list)) else node
            if isinstance(target, dict):
                target[data.draw(keys, label="key")] = data.draw(values, label="value")
            else:
                target.append(data.draw(values, label="value"))
    _parse_or_input_error(doc)
