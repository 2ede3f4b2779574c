"""Shared by every test folder. Its presence puts tests/ on sys.path (pytest's default
"prepend" import mode), so helpers kept here, such as mutations.py, import by plain name."""
