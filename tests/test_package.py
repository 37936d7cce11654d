import subprocess
import sys

import geo3d


def test_every_public_name_resolves():
    for name in geo3d.__all__:
        assert getattr(geo3d, name) is not None, name


def test_import_is_light():
    # The command line imports geo3d first: heavy libraries load only when a stage needs them.
    code = (
        "import sys, geo3d; "
        "print(sorted(m for m in ('pyvista', 'geopandas', 'matplotlib') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_python_dash_m_runs_the_command_line():
    out = subprocess.run(
        [sys.executable, "-m", "geo3d", "--version"], capture_output=True, text=True, check=True
    )
    assert geo3d.__version__ in out.stdout
