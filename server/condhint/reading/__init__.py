"""Reading Python source into sites: positions, names and imports, range comments, the statement walker."""
