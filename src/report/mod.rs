//! Results tables (CSV, JSON), SVG plots and the HTML report.
