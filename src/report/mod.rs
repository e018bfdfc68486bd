//! Reports for people and machines: plain tables, JSON, SVG plots.

pub mod table;
