//! `learn`: the CPU PPO learner — Gaussian policy and value networks, rollout buffer, GAE, PPO
//! update, observation normalisation, Adam, checkpoints; metrics leave the loop through
//! [`Observer`]. No TOML and no files other than checkpoints live here.
//!
//! Two update paths compute the same losses and gradients (`fused::tests` checks them within
//! 1e-5): the generic one through candle's autograd (`ppo::loss_and_grads`, any network shape,
//! also in f64 for the finite-difference check), and the default fused one (`fused`, hand-written
//! backward passes over contiguous f32 buffers with the small-matrix kernels of `kernels`, chosen
//! at run time: AVX-512, AVX2 or portable, same bits on each; no allocation after the first
//! minibatch), chosen by `PpoConfig::fused_update`. Rollouts use a plain-Rust forward pass. Throughput on one core: `cargo bench --bench learn -- ppo_iteration`.
//!
//! Methods and sources:
//! - PPO: Schulman, Wolski, Dhariwal, Radford, Klimov, "Proximal Policy Optimization Algorithms",
//!   2017 (clipped objective eq. 7, continuous-control hyperparameters Table 3).
//! - GAE: Schulman, Moritz, Levine, Jordan, Abbeel, "High-Dimensional Continuous Control Using
//!   Generalized Advantage Estimation", ICLR 2016 (eq. 16).
//! - Time-limit bootstrapping: Pardo, Tavakoli, Levdik, Kormushev, "Time Limits in Reinforcement
//!   Learning", ICML 2018.
//! - Adam: Kingma & Ba, "Adam: A Method for Stochastic Optimization", ICLR 2015 (Algorithm 1).
//! - Running mean/variance: Welford, "Note on a method for calculating corrected sums of squares
//!   and products", Technometrics 1962.
//!
//! ```no_run
//! use termwise::learn::{Environment, NoObserver, PpoConfig, Trainer};
//! # fn envs() -> Vec<Box<dyn Environment>> {
//! #     // Any `Environment` works; the study runner builds arm tasks (`study::run::build_envs`).
//! #     Vec::new()
//! # }
//! let mut trainer = Trainer::new(PpoConfig::default(), envs(), 7).unwrap();
//! while trainer.env_steps() < 100_000 {
//!     let stats = trainer.iterate(&mut NoObserver).unwrap();
//!     println!("{} {}", stats.env_steps, stats.mean_episode_return);
//! }
//! ```

pub mod activation;
mod adam;
mod buffer;
pub mod checkpoint;
mod config;
mod env;
mod error;
pub mod fused;
pub mod gae;
pub mod gaussian;
pub mod kernels;
mod mlp;
mod normalize;
mod observer;
mod policy;
pub mod ppo;
mod threads;
mod trainer;

pub use adam::{Adam, AdamParams};
pub use buffer::RolloutBuffer;
pub use config::PpoConfig;
pub use env::{Environment, Transition};
pub use error::LearnError;
pub use mlp::{orthogonal, Mlp};
pub use normalize::{ObsNormalizer, RunningMoments};
pub use observer::{EpisodeEnd, IterationStats, NoObserver, Observer};
pub use policy::{Policy, RowsScratch};
pub use threads::pin_kernel_threads;
pub use trainer::Trainer;
