# load_test.py and hostile_clients.py are scripts (python tests/load/<name>.py), not part of the pytest suite.
collect_ignore = ["load_test.py", "hostile_clients.py"]
