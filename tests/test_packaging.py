"""The package as other programs meet it: one import name in the wheel, a light install and a
numpy-only runtime, no collision with common local package names, and no link that leaves the
repository. These run against the installed package (what `pip install .` put in site-packages)."""

import json
import os
import subprocess
import sys
import venv
import zipfile
from pathlib import Path

import pytest

import radialpn

ROOT = Path(__file__).resolve().parents[1]
BUNDLES = tuple(f"{m}-{c}core" for m in ("gaas", "inp", "si", "ge", "gan", "inas") for c in "pn")  # models/specs
#: what `pip install radialpn` may bring: numpy, rich and rich's own dependencies (common practice:
#: rich 13-15 depends on markdown-it-py (with mdurl) and pygments), plus the venv's own tools
BASE_DISTRIBUTIONS = {"radialpn", "numpy", "rich", "markdown-it-py", "mdurl", "pygments", "tomli", "pip", "setuptools",
                      "typing-extensions"}
DESIGN = ("dict(material='GaAs', core_type='p', core_radius_nm=60.0, shell_thickness_nm=45.0, core_doping_cm3=2e18, "
          "shell_doping_cm3=2e18, dit_cm2eV=5e12)")
#: exercises every design question of the API; prints the third-party modules it loaded
SCRIPT = f"""
import sys, numpy as np, radialpn
d = {DESIGN}
one = radialpn.predict(d)
assert one['status'][0] == 'ok', one['status']
rng = np.random.default_rng(0)
many = radialpn.predict({{**d, 'core_radius_nm': rng.uniform(20, 200, 100_000)}})
assert many['regime'].size == 100_000 and (many['status'] == 'ok').mean() > 0.99
sol = radialpn.solve({{**d, 'shell_thickness_nm': np.linspace(10, 80, 50)}})
assert (sol['status'] == 'ok').all()
m = radialpn.regime_map(d, ('core_doping_cm3', 1e17, 1e19), ('core_radius_nm', 20, 150), (4, 3))
c = radialpn.critical_dimensions(d)
assert c['shell_thickness_nm']['confirmed'] is not None
s = radialpn.search(d, {{'shell_thickness_nm': (2, 100)}}, candidates=2000, top=2)
sp = radialpn.spread(d, {{'shell_thickness_nm': '2nm', 'dit_cm2eV': '50%'}}, samples=2000)
p = radialpn.profile(d)
loaded = sorted({{n.split('.')[0] for n in sys.modules}} - set(sys.stdlib_module_names) - {{'__main__', 'cython_runtime'}})  # the latter: numpy's Cython modules' bookkeeping, not a package
print(' '.join(n for n in loaded if not n.startswith('_')))
"""


def test_suite_runs_against_the_installed_package():
    # The suite must exercise what users install: the package's own bundle path, not models/.
    pkg = Path(radialpn.__file__).resolve().parent
    assert pkg.name == "radialpn", "run the tests after `pip install .` (README), not on the source tree"
    found = {name: Path(path).resolve() for name, _, _, path in radialpn.available()}
    assert set(BUNDLES) <= set(found)
    for name in BUNDLES:
        assert found[name].parent == pkg / "bundles", name


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    subprocess.run([sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(out), str(ROOT)],
                   check=True, capture_output=True, timeout=600)
    return next(out.glob("radialpn-*.whl"))


def test_wheel_installs_one_top_level_name_with_its_bundles(wheel):
    with zipfile.ZipFile(wheel) as z:
        names = z.namelist()
        meta = next(n for n in names if n.endswith(".dist-info/METADATA"))
        requires = [line.split(":", 1)[1].strip() for line in z.read(meta).decode().splitlines()
                    if line.startswith("Requires-Dist:")]
    tops = {n.split("/")[0] for n in names if not n.split("/")[0].endswith(".dist-info")}
    assert tops == {"radialpn"}
    for b in BUNDLES:
        for f in ("bundle.json", "arrays.npz", "SHA256SUMS", "CARD.md"):
            assert f"radialpn/bundles/{b}/{f}" in names
    base = sorted(r.split(">")[0].split(";")[0].strip() for r in requires if "extra ==" not in r)
    assert base == ["numpy", "rich", "tomli"]  # tomli only below Python 3.11


@pytest.mark.slow
def test_fresh_venv_without_extras_answers_with_numpy_alone(wheel, tmp_path):
    # A pipeline author's install: the wheel alone, no extras. Every design question answers,
    # and numpy is the only third-party module loaded (radialpn itself aside).
    env_dir = tmp_path / "venv"
    venv.create(env_dir, with_pip=True)
    py = env_dir / ("Scripts/python.exe" if os.name == "nt" else "bin/python")
    subprocess.run([str(py), "-m", "pip", "install", "-q", "--disable-pip-version-check", str(wheel)], check=True,
                   capture_output=True, timeout=900)
    listed = subprocess.run([str(py), "-m", "pip", "list", "--format=json", "--disable-pip-version-check"],
                            check=True, capture_output=True, text=True).stdout
    installed = {d["name"].lower() for d in json.loads(listed)}
    assert installed <= BASE_DISTRIBUTIONS, installed - BASE_DISTRIBUTIONS
    res = subprocess.run([str(py), "-c", SCRIPT], capture_output=True, text=True, timeout=900, cwd=tmp_path)
    assert res.returncode == 0, res.stderr[-2000:]
    assert res.stdout.split() == ["numpy", "radialpn"]


def test_local_packages_with_common_names_do_not_shadow_radialpn(tmp_path):
    # Other groups' trees often hold packages called surrogate, training, cli or models; with
    # those first on sys.path radialpn must still answer from its own modules.
    for name in ("surrogate", "training", "cli", "models", "bundles"):
        (tmp_path / name).mkdir()
        (tmp_path / name / "__init__.py").write_text("raise ImportError('a local package, not radialpn')\n")
    code = ("import io, radialpn; from radialpn.cli import main\n"
            f"d = {DESIGN}\n"
            "assert radialpn.predict(d)['status'][0] == 'ok' and radialpn.solve(d)['status'][0] == 'ok'\n"
            "args = ['ask', '--material', 'GaAs', '--core-type', 'p', '--core-radius', '60nm', '--shell-thickness',"
            " '45nm', '--core-doping', '2e18', '--shell-doping', '2e18', '--dit', '5e12', '--engine', 'solver', '--json']\n"
            "out = io.StringIO(); assert main(args, out=out) == 0 and '\"solver\"' in out.getvalue()\n")
    env = {**os.environ, "PYTHONPATH": str(tmp_path)}
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path, env=env)
    assert res.returncode == 0, res.stderr[-2000:]


def test_no_file_links_outside_the_repository():
    try:
        files = subprocess.run(["git", "ls-files"], cwd=ROOT, capture_output=True, text=True, check=True).stdout.split()
    except (OSError, subprocess.CalledProcessError):
        pytest.skip("not a git checkout")
    outside = ".." + "/shared"  # written apart so this file does not match itself
    bad = [f for f in files if f.endswith((".md", ".py", ".toml", ".txt"))
           and outside in (ROOT / f).read_text(encoding="utf-8", errors="replace")]
    assert bad == []


def test_version_is_the_distribution_version():
    from importlib.metadata import version

    assert radialpn.__version__ == version("radialpn")
