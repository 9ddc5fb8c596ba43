"""PDF and vector-graphics output: charts, lab-day sheets, labels and certificates."""
