"""`python -m logger` is `saglog` under another name: the same help and messages."""

from logger.cli.main import main

main(prog_name="saglog")
