"""Where the test extra's copy of the public table repository's XTbML files is.

The package ``pymort`` (PyPI, test-only) ships about 3,000 XTbML files of the SOA's public mortality and
other rate tables repository in its ``table_xml`` folder. Its location is found without importing the
package. Tests that need the files skip, saying why, when the package is missing; CI installs the test
extra, so they run there.
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest


def repository_folder() -> Path | None:
    """The folder of XTbML files (``t<identity>.xml``), or None when the package is not installed."""
    spec = importlib.util.find_spec("pymort")
    if spec is None or spec.origin is None:
        return None
    folder = Path(spec.origin).parent / "table_xml"
    return folder if folder.is_dir() else None


REPOSITORY = repository_folder()

needs_repository = pytest.mark.skipif(
    REPOSITORY is None,
    reason="the XTbML files of the public table repository are not installed (package pymort, part of the "
           "test extra: pip install -e '.[test]')",
)


def table_file(identity: int) -> Path:
    """The file of a table identity, e.g. 3123 -> .../table_xml/t3123.xml."""
    assert REPOSITORY is not None
    return REPOSITORY / f"t{identity}.xml"
