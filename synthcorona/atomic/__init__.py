"""CHIANTI → emissivity table: the only code that imports fiasco (locating CHIANTI, the table builder, line selection)."""
