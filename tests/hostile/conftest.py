"""Markers of the hostile-input battery, read by ``benchmarks/reliability.py``.

- ``entry("name")``: the public entry point a case attacks (else the test name or file decides; see the script).
- ``hang``: the case guards against a hang (a failure counts as a hang, not a crash).
- ``silent``: the case guards against a silent wrong answer (a failure counts as one).
"""


def pytest_configure(config):
    config.addinivalue_line("markers", "entry(name): the public entry point a hostile case attacks")
    config.addinivalue_line("markers", "hang: the hostile case guards against a hang")
    config.addinivalue_line("markers", "silent: the hostile case guards against a silent wrong answer")
