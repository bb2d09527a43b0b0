"""Ships the bundled cases/ and meshes/ (kept at the repository root) inside the package as
fvrans/bundled_data/, so that an installed fvrans finds them from any folder (fvrans.bundled)."""

from pathlib import Path

from setuptools import setup
from setuptools.command.build_py import build_py

ROOT = Path(__file__).resolve().parent
#: folder -> file patterns copied into fvrans/bundled_data/<folder> (data only, no scripts)
BUNDLED = {"cases": ("*.toml", "*.csv"), "meshes": ("*.msh",)}


class BuildWithBundledCases(build_py):
    """build_py that also copies the bundled case data into the built package."""

    def run(self) -> None:
        super().run()
        for folder, patterns in BUNDLED.items():
            for pattern in patterns:
                for src in sorted((ROOT / folder).rglob(pattern)):
                    dst = Path(self.build_lib) / "fvrans" / "bundled_data" / src.relative_to(ROOT)
                    self.mkpath(str(dst.parent))
                    self.copy_file(str(src), str(dst))


setup(cmdclass={"build_py": BuildWithBundledCases})
