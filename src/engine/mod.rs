//! The engine: which instrument answers to which currency (`relevance`),
//! how long each release's window lasts (`windows`), and which trades meet
//! which windows (`exposure`), and the same for moved copies of the
//! calendar (`shifted`). Depends only on `import`.

pub mod exposure;
pub mod relevance;
pub mod shifted;
pub mod windows;
