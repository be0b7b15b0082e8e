//! Writers: each output format is one small function that returns bytes from the same
//! result structs.

pub mod csv;
pub mod design;
pub mod findings;
pub mod format;
pub mod json;
pub mod observables;
pub mod plot;
pub mod reduce;
pub mod shape;
pub mod spectrum;
pub mod text;
pub mod two_time;

pub use format::sig;
