"""Batch records: the context assembled from the database, the PDF, signatures and seals."""
