//! The rows the two-way fixed effects keep: singletons peeled until none is left, and which row
//! follows its entity's previous period.

use super::*;

impl PanelCore {
    /// For each row, whether the row before is the previous period (by value) of the same
    /// entity.
    pub fn previous_period(&self) -> Vec<bool> {
        let value = |code: u32| self.periods[code as usize];
        std::iter::once(false)
            .chain(
                self.entity
                    .windows(2)
                    .zip(self.period.windows(2))
                    .map(|(e, t)| e[0] == e[1] && value(t[1]) == value(t[0]) + 1),
            )
            .take(self.rows())
            .collect()
    }

    /// Distinct keys removed by dropping, again and again, every key whose entity or period
    /// has a single key left (Correia 2015): what is left is the largest set in which every
    /// entity and every period has two keys or more, whatever the order of removal.
    pub fn two_way_singletons(&self) -> u64 {
        let (_, alive) = self.peel();
        alive.iter().filter(|a| !**a).count() as u64
    }

    /// For each row, whether its key survives that iterated dropping.
    pub fn two_way_kept(&self) -> Vec<bool> {
        let (key_of_row, alive) = self.peel();
        key_of_row.iter().map(|k| alive[*k as usize]).collect()
    }

    /// The distinct key of each row and whether each key survives the peeling.
    fn peel(&self) -> (Vec<u32>, Vec<bool>) {
        // Distinct keys: copies of a key sit next to each other in the sorted panel.
        let mut keys: Vec<(u32, u32)> = Vec::with_capacity(self.rows());
        let mut key_of_row = Vec::with_capacity(self.rows());
        for (e, t) in self.entity.iter().zip(&self.period) {
            if keys.last() != Some(&(*e, *t)) {
                keys.push((*e, *t));
            }
            key_of_row.push((keys.len() - 1) as u32);
        }
        let (ne, nt) = (self.entities(), self.periods.len());
        let mut e_keys = vec![0u32; ne];
        let mut t_keys = vec![0u32; nt];
        let mut e_start = vec![0usize; ne + 1];
        let mut by_period: Vec<Vec<u32>> = vec![Vec::new(); nt];
        for (k, (e, t)) in keys.iter().enumerate() {
            e_keys[*e as usize] += 1;
            t_keys[*t as usize] += 1;
            by_period[*t as usize].push(k as u32);
        }
        for e in 0..ne {
            e_start[e + 1] = e_start[e] + e_keys[e] as usize;
        }
        let mut alive = vec![true; keys.len()];
        let mut stack: Vec<(bool, u32)> = (0..ne)
            .filter(|e| e_keys[*e] == 1)
            .map(|e| (true, e as u32))
            .chain(
                (0..nt)
                    .filter(|t| t_keys[*t] == 1)
                    .map(|t| (false, t as u32)),
            )
            .collect();
        while let Some((is_entity, i)) = stack.pop() {
            let i = i as usize;
            let k = if is_entity {
                if e_keys[i] != 1 {
                    continue;
                }
                (e_start[i]..e_start[i + 1]).find(|k| alive[*k])
            } else {
                if t_keys[i] != 1 {
                    continue;
                }
                by_period[i].iter().map(|k| *k as usize).find(|k| alive[*k])
            };
            let Some(k) = k else { continue };
            alive[k] = false;
            let (e, t) = (keys[k].0 as usize, keys[k].1 as usize);
            e_keys[e] -= 1;
            t_keys[t] -= 1;
            if e_keys[e] == 1 {
                stack.push((true, e as u32));
            }
            if t_keys[t] == 1 {
                stack.push((false, t as u32));
            }
        }
        (key_of_row, alive)
    }
}
