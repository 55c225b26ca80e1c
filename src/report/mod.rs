//! Every output's layout as plain structs that serialise to JSON: the
//! analysis summary (`summary`), the import overview (`check`), the ranking
//! (`rank`) and the window sweep (`tune`), plus `types`, the lower-layer
//! vocabulary those structs carry. Renderers read these; nothing here
//! computes a figure. Depends only on `analysis`, `engine`, `import`.

pub mod check;
pub mod rank;
pub mod summary;
pub mod tune;
pub mod types;
