"""``python -m dha`` works the same as the ``dha`` console script."""
from dha.cli import main

if __name__ == "__main__":
    main()
