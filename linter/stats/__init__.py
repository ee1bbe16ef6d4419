"""The statistics layer: mergeable summaries, the QR factor of the design, the preliminary fit."""
