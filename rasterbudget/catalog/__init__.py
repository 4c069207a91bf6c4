"""What the package knows by name: QA bits, land-cover classes, inputs and output variables."""
