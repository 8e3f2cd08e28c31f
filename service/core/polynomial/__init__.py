"""The polynomial family: basis and scaling, QR, nested candidates, selection, tables, bands."""
