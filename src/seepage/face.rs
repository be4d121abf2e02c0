//! The seepage-face and drain condition: pressure is atmospheric (head = elevation) exactly
//! where water leaves the ground, and there is no flow elsewhere on the stretch.
//!
//! A seepage face is wet from its foot up to the exit point and dry above, so its nodes are
//! switched as one contiguous run by elevation: the exit moves down to the highest wet node
//! that still lets water out, and up by one node when the node above it would hold a head above
//! its elevation. Starting wet to the top, this finds the highest consistent exit point (the
//! fixed-mesh method has lower, spurious ones where dry elements starve the face). Drain nodes
//! switch one by one (off on inflow, on when the head exceeds the elevation).
//!
//! Owns: the wet/dry state of outflow nodes. Must not: assemble or solve.

use super::geometry::Point;
use super::model::{BoundaryKind, SectionModel};
use super::solve::NodeCondition;

/// The wet/dry state of every outflow node.
#[derive(Debug, Clone)]
pub struct FaceState {
    /// Nodes of each seepage-face stretch, by rising elevation.
    faces: Vec<Vec<usize>>,
    /// Number of wet nodes (from the bottom) of each face.
    wet_count: Vec<usize>,
    /// Drain nodes.
    drains: Vec<usize>,
    /// Whether each node is wet (atmospheric).
    pub wet: Vec<bool>,
}

impl FaceState {
    /// Every outflow node wet.
    #[must_use]
    pub fn new(model: &SectionModel, nodes: &[Point], condition: &[NodeCondition]) -> Self {
        let mut faces = Vec::new();
        let mut drains = Vec::new();
        for (s, b) in model.boundaries.iter().enumerate() {
            let mut members: Vec<usize> = (0..nodes.len())
                .filter(|&i| condition[i] == NodeCondition::Outflow { stretch: s })
                .collect();
            match b.kind {
                BoundaryKind::SeepageFace => {
                    members.sort_by(|&a, &b| nodes[a].y.total_cmp(&nodes[b].y));
                    faces.push(members);
                }
                BoundaryKind::Drain => drains.extend(members),
                _ => {}
            }
        }
        let wet_count = faces.iter().map(Vec::len).collect();
        let mut wet = vec![false; nodes.len()];
        for &i in faces.iter().flatten().chain(&drains) {
            wet[i] = true;
        }
        Self {
            faces,
            wet_count,
            drains,
            wet,
        }
    }

    /// Update from a solve's heads and nodal outflows; whether anything changed.
    pub fn update(&mut self, nodes: &[Point], head: &[f64], outflow: &[f64]) -> bool {
        let eps = 1e-10 * outflow.iter().map(|q| q.abs()).fold(0.0, f64::max);
        let mut changed = false;
        for (f, face) in self.faces.iter().enumerate() {
            let old = self.wet_count[f];
            // Down: to the highest wet node that lets water out.
            let mut count = face[..old]
                .iter()
                .rposition(|&i| outflow[i] >= -eps)
                .map_or(0, |k| k + 1);
            // Up by one: the first dry node would hold water above its elevation.
            if count == old && count < face.len() {
                let i = face[count];
                if head[i] > nodes[i].y + 1e-9 {
                    count += 1;
                }
            }
            if count != old {
                changed = true;
                self.wet_count[f] = count;
                for (k, &i) in face.iter().enumerate() {
                    self.wet[i] = k < count;
                }
            }
        }
        for &i in &self.drains {
            if self.wet[i] && outflow[i] < -eps {
                self.wet[i] = false;
                changed = true;
            } else if !self.wet[i] && head[i] > nodes[i].y + 1e-9 {
                self.wet[i] = true;
                changed = true;
            }
        }
        changed
    }
}
