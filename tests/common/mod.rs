//! Lock-step chains of real nodes, shared by the integration tests.
#![allow(dead_code)]

use entrain::{Config, Gain, Law, Node, Observation, Phase};

#[cfg(feature = "assess")]
pub mod biased;
#[cfg(feature = "sim")]
pub mod sim;

/// Ticks per phase turn and per update used by these tests: one update per turn of a
/// 1 MHz timer, so a crystal error of e ppm is exactly e extra ticks per update.
pub const TICKS: u32 = 1_000_000;

pub fn config(law: Law, kp: f32, ki: f32) -> Config {
    Config::builder(TICKS, TICKS)
        .law(law)
        .kp(Gain::from_f32(kp).unwrap())
        .ki(Gain::from_f32(ki).unwrap())
        .slew_limit(i32::MAX as u32)
        .trim_limit_ppb(100_000_000)
        .build()
        .unwrap()
}

/// A chain of nodes and their timers; node i's timer runs at (1 + ppm_i·10⁻⁶) of nominal.
pub struct Chain {
    pub nodes: Vec<Node<2>>,
    pub ticks: Vec<u32>,
    pub ppm: Vec<i32>,
}

impl Chain {
    pub fn new(config: Config, phases: &[Phase], ppm: &[i32]) -> Chain {
        assert_eq!(phases.len(), ppm.len());
        Chain {
            nodes: phases.iter().map(|&p| Node::new(config, p, 0)).collect(),
            ticks: vec![0; phases.len()],
            ppm: ppm.to_vec(),
        }
    }

    /// One update period of real time: every timer runs, every node hears both
    /// neighbours' phases of this instant (no delay), then every node updates.
    /// Returns each node's correction.
    pub fn step(&mut self) -> Vec<i32> {
        self.advance();
        self.update_all()
    }

    /// Run every timer for one update period of real time and exchange phases, without
    /// updating: the differences the law is about to act on are then [`Chain::edge_diffs`].
    pub fn advance(&mut self) {
        for (t, ppm) in self.ticks.iter_mut().zip(&self.ppm) {
            *t = t.wrapping_add((i64::from(TICKS) + i64::from(*ppm)) as u32);
        }
        self.exchange();
    }

    /// Update every node at its current timer reading; returns the corrections.
    pub fn update_all(&mut self) -> Vec<i32> {
        self.nodes
            .iter_mut()
            .zip(&self.ticks)
            .map(|(n, &t)| n.update(t).correction)
            .collect()
    }

    /// Every node observes its neighbours at the current instant (no update).
    pub fn exchange(&mut self) {
        let phases: Vec<Phase> = self
            .nodes
            .iter()
            .zip(&self.ticks)
            .map(|(n, &t)| n.phase_at(t))
            .collect();
        let n = self.nodes.len();
        for i in 0..n {
            self.nodes[i].advance_to(self.ticks[i]);
            for j in [i.wrapping_sub(1), i + 1] {
                if j < n {
                    let obs = Observation {
                        from: j as u16,
                        phase: phases[j],
                        rx_ticks: self.ticks[i],
                        delay_ticks: 0,
                    };
                    self.nodes[i].observe(obs).unwrap();
                }
            }
        }
    }

    /// Neighbour differences θ_{k+1} − θ_k in counts (wrapped).
    pub fn edge_diffs(&self) -> Vec<i32> {
        self.nodes
            .windows(2)
            .map(|w| w[1].phase().diff(w[0].phase()))
            .collect()
    }

    /// Positions unwrapped along the chain (node 0 at 0), in counts.
    pub fn unwrapped(&self) -> Vec<f64> {
        let mut x = vec![0.0];
        for d in self.edge_diffs() {
            let last = *x.last().unwrap();
            x.push(last + f64::from(d));
        }
        x
    }

    /// Σ (x_i − mean)², counts², of the unwrapped positions.
    pub fn disagreement(&self) -> f64 {
        let x = self.unwrapped();
        let mean = x.iter().sum::<f64>() / x.len() as f64;
        x.iter().map(|v| (v - mean).powi(2)).sum()
    }
}

/// λmax of the path graph on n nodes: 2 − 2cos((n−1)π/n) (Fiedler 1973).
pub fn path_lambda_max(n: usize) -> f64 {
    2.0 - 2.0 * ((n as f64 - 1.0) * std::f64::consts::PI / n as f64).cos()
}

/// λ2 of the path graph on n nodes: 2 − 2cos(π/n) (Fiedler 1973).
pub fn path_lambda_2(n: usize) -> f64 {
    2.0 - 2.0 * (std::f64::consts::PI / n as f64).cos()
}
