"""No two top packages of `service` reach each other, by any chain of imports.

The layers contract (`lint-imports`) checks the packages it lists, at module level; this
check squashes each top package (service.api, service.keys, ...) into one node of grimp's
import graph, the graph import-linter itself builds, and asks for a chain both ways between
every pair, so a package left out of the list or a cycle only visible between packages
(a.x -> b.y and b.z -> a.w) fails too. Run as a script it prints what it finds.
"""

from __future__ import annotations

import copy
import itertools

import grimp
import pytest

ROOT = "service"


def top_packages(graph: grimp.ImportGraph) -> list[str]:
    """The direct children of the root: packages and single modules alike."""
    return sorted(graph.find_children(ROOT))


def squashed_graph() -> grimp.ImportGraph:
    """The import graph of `service` with every top package squashed into one node."""
    graph = grimp.build_graph(ROOT)
    for name in top_packages(graph):
        if graph.find_children(name):
            graph.squash_module(name)
    return graph


def package_cycles(graph: grimp.ImportGraph) -> list[tuple[tuple[str, ...], tuple[str, ...]]]:
    """Each pair of top packages with a chain both ways: (chain there, chain back)."""
    found = []
    for a, b in itertools.combinations(top_packages(graph), 2):
        there = graph.find_shortest_chain(importer=a, imported=b)
        back = graph.find_shortest_chain(importer=b, imported=a) if there else None
        if there and back:
            found.append((tuple(there), tuple(back)))
    return found


def describe(cycles: list[tuple[tuple[str, ...], tuple[str, ...]]]) -> str:
    """One line per cycle, both chains written out; "no cycles" when there are none."""
    if not cycles:
        return "no cycles"
    return "\n".join(f"{' -> '.join(t)}  and back  {' -> '.join(b)}" for t, b in cycles)


@pytest.fixture(scope="module")
def graph() -> grimp.ImportGraph:
    """The squashed graph, built once for the module."""
    return squashed_graph()


def test_no_cycle_between_top_packages(graph: grimp.ImportGraph) -> None:
    cycles = package_cycles(graph)
    assert not cycles, describe(cycles)


def test_the_check_sees_the_packages(graph: grimp.ImportGraph) -> None:
    # Guards against a check that passes because the graph is empty or unsquashed.
    names = top_packages(graph)
    assert {"service.api", "service.keys", "service.register", "service.errors"} <= set(names)
    assert graph.find_shortest_chain(importer="service.api", imported="service.keys")


def test_a_planted_upward_import_is_a_cycle(graph: grimp.ImportGraph) -> None:
    # The register imports the API (errors); the API importing the register closes a cycle.
    planted = copy.deepcopy(graph)
    planted.add_import(importer="service.api", imported="service.register")
    cycles = package_cycles(planted)
    assert any({c[0][0], c[0][-1]} == {"service.api", "service.register"} for c in cycles)
    assert "service.api -> service.register" in describe(cycles)
    assert not package_cycles(graph)  # the copy took the import, not the real graph


if __name__ == "__main__":
    print(describe(package_cycles(squashed_graph())))
