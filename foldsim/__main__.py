import sys

try:
    from .cli import main

    code = main()
except KeyboardInterrupt:  # Ctrl-C while the modules were still loading
    print("foldsim: interrupted", file=sys.stderr)
    code = 130
sys.exit(code)
