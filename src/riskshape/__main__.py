"""``python -m riskshape`` runs the command line."""

from riskshape.cli import main

main()
