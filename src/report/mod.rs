//! Report writers: terminal, JSON, HTML with SVG plots, flight parameters.
