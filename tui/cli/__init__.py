"""The `chaintriage` command line: ``main`` (the dispatcher) and one module per subcommand.

Importing this package imports nothing else: the dispatcher (``main``) imports
a subcommand's module only when that subcommand runs, so ``chaintriage --help``
and the non-interactive subcommands load neither Textual nor more of core than
they use.
"""
