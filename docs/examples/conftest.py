"""Make the demo package `marram` importable wherever this folder is copied."""
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
