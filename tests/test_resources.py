"""Shipped folders are found in a source checkout (and, via the same code, in an installed copy)."""
import pytest

from analog._resources import resource_dir


@pytest.mark.parametrize("kind, member", [("schemas", "taxa.schema.json"), ("maps", "analog.mplstyle"),
                                          ("demo", "study.toml")])
def test_resource_dir_holds_expected_file(kind, member):
    folder = resource_dir(kind)
    assert folder.is_dir()
    assert (folder / member).is_file()
