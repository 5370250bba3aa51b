//! Metrology records (SPEC §14): what an accredited laboratory needs on file beside the fit.
//!
//! Pure computations, no I/O:
//! - [`gum`]: combined and expanded uncertainty (JCGM 100:2008), Welch–Satterthwaite;
//! - [`curve`]: a calibration curve of one predictor — value, slope, fit uncertainty,
//!   inverse — and [`ModelCurve`], the curve of a fitted model or a stored result;
//! - [`read_off`]: values read off a curve forward or inverse with their uncertainty budget
//!   (what `predict` calls);
//! - [`tolerance`] and [`decision`]: tolerances as procedures phrase them and the decision
//!   rules of ILAC-G8 (simple acceptance, guard band);
//! - [`as_found`]: calibration points against an old or new curve, and the change of the
//!   curve between calibrations;
//! - [`assay`]: back-calculated standards (ICH M10);
//! - [`record`] and [`date`]: item, procedure, standards, conditions, report ids;
//! - [`warnings`]: what `predict` warns about a stored result.

pub mod as_found;
pub mod assay;
pub mod criteria;
pub mod curve;
pub mod date;
pub mod decision;
pub mod gum;
pub mod read_off;
pub mod record;
pub mod tolerance;
pub mod warnings;

pub use curve::{Curve, CurveSpec, ModelCurve};
pub use date::Date;
pub use decision::{Decision, DecisionRule};
pub use gum::{Component, Contribution, Coverage, Expanded};
pub use read_off::{Budget, ReadOff};
pub use record::report_id;
pub use tolerance::{Axis, Combine, Tolerance};
