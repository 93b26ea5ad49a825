# Doctest collection imports every module under bakery/; the entry point would run the CLI.
collect_ignore = ["bakery/__main__.py"]
