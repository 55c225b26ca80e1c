//! The engine: which instrument answers to which currency (`relevance`),
//! how long each release's window lasts (`windows`), and which trades meet
//! which windows (`exposure`), and the same for moved copies of the
//! calendar (`shifted`), and for many moved copies at once by the windows' times
//! of day (`daytimes`). Depends only on `import`.

pub mod daytimes;
pub mod exposure;
pub mod relevance;
pub mod shifted;
pub mod windows;
