"""Shipping: final quantities, shipments of a job's boards and the certificate of conformance."""
