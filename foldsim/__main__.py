import signal
import sys

try:
    from .cli import main

    code = main()
    # The work is done: a Ctrl-C from here on must not turn a finished run into a
    # death by signal on the way out.
    signal.signal(signal.SIGINT, signal.SIG_IGN)
except KeyboardInterrupt:  # Ctrl-C while the modules were still loading, or as the run ended
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    print("foldsim: interrupted", file=sys.stderr)
    code = 130
sys.exit(code)
