"""The render layer for PDF and SVG: labels, certificates, drift charts, the lab-day sheet, the recall
report and the drawn traceability chain.

Modules here turn records and pure results into documents and drawings (reportlab for PDF and the
charts; plain SVG text for the chain). They import the pure modules, the record layer and the read
model, never stockroom.web: pages call them, not the other way round. Every number goes through
stockroom.formatting, so a value reads the same on a label, a certificate and a page.
"""
