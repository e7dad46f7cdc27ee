# load_test.py is a script (python tests/load/load_test.py), not part of the pytest suite.
collect_ignore = ["load_test.py"]
