//! Steady two-dimensional seepage through and under a section (Laplace/Darcy flow), confined
//! or unconfined, by linear finite elements on a generated triangular mesh; the outputs an
//! engineer reads from a flow net; and calibration of zone permeabilities to piezometer heads.
//!
//! A pure core: functions of geometry, permeabilities and water levels. No configuration types,
//! no drawing, no I/O, no clock.
//!
//! Files: `geometry` (plane predicates), `model` (the section's data), `validate` (problems),
//! `mesh` and `mesh_topology` (triangulation, cut impervious lines, boundary edges), `sparse`
//! (matrix and conjugate gradients), `solve` (conditions, assembly, free surface), `face`
//! (seepage-face and drain switching),
//! `outputs` (heads, phreatic surface, exit point, gradients, flows), `stream` (stream
//! function), `calibrate` (fit to piezometers).

pub mod calibrate;
pub mod face;
pub mod geometry;
pub mod mesh;
pub mod mesh_topology;
pub mod model;
pub mod outputs;
pub mod solve;
pub mod sparse;
pub mod stream;
pub mod validate;

pub use geometry::Point;
pub use mesh::{build_mesh, LocalSize, Mesh, MeshError, MeshOptions};
pub use model::{Boundary, BoundaryKind, ImperviousLine, Material, SectionModel, Zone};
pub use solve::{solve, NodeCondition, SeepageError, Solution, SolveOptions};
pub use validate::{check_points, validate, Problem, Subject};
