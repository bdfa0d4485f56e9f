//! Demo clients of the startmargin API. The `evening-run` binary assesses the invented fleet of
//! an invented municipal depot through the SDK over real gRPC, prints a table (or JSON lines) and
//! writes two SVG charts; `month-of-mornings` feeds a month of invented start attempts and draws
//! the fleet's reliability before and after calibration. The modules are a library so that their tests run without a server.

pub mod chart;
pub mod console;
pub mod mornings;
pub mod reliability_chart;
pub mod report;
pub mod run;
pub mod scenario;
pub mod style;
pub mod svg;
pub mod table;
