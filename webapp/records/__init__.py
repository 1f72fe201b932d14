"""Work records: the PDF, the station's certificate authority, signing and verification."""
