"""`python -m optimiser` runs the afpm command line."""
from .cli import app

app()
