//! Matching a stage netlist to a layout by connectivity alone: which part joins the input, the
//! op-amp pins, ground or an inner node. Node numbers and part order do not matter.

use super::layouts::{Inputs, Layout, Sym};
use crate::netlist::{Node, PartKind, StageNetlist};

fn op_amp_pins(net: &StageNetlist) -> Option<(Node, Node, Node)> {
    let part = net.parts.iter().find(|p| p.kind == PartKind::OpAmp)?;
    match part.nodes.as_slice() {
        [plus, minus, out] => Some((*plus, *minus, *out)),
        _ => None,
    }
}

/// Binds the layout's symbols to netlist nodes and each passive part to a slot. Returns, for each
/// slot, the index of the part placed there (`None` for an absent optional slot).
pub(super) fn match_layout(layout: &Layout, net: &StageNetlist) -> Option<Vec<Option<usize>>> {
    if layout.inputs == Inputs::Chain {
        return super::chain::match_chain(net);
    }
    let pins = op_amp_pins(net);
    let mut bind: [Option<Node>; 6] = [None; 6];
    let index = |s: Sym| s as usize;
    bind[index(Sym::In)] = Some(Some(net.input));
    bind[index(Sym::Gnd)] = Some(None);
    match (layout.inputs, pins) {
        (Inputs::Passive, None) => {
            bind[index(Sym::O)] = Some(Some(net.output));
        }
        (Inputs::Passive, Some(_)) | (_, None) => return None,
        (inputs, Some((plus, minus, out))) => {
            if out != Some(net.output) {
                return None;
            }
            bind[index(Sym::O)] = Some(out);
            match inputs {
                Inputs::Follower => {
                    if minus != out {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(plus);
                }
                Inputs::WithGain => {
                    if minus == out || minus.is_none() {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(plus);
                    bind[index(Sym::M)] = Some(minus);
                }
                Inputs::Inverting => {
                    if plus.is_some() {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(None);
                    bind[index(Sym::M)] = Some(minus);
                }
                Inputs::Lifted => {
                    if plus.is_none() || minus.is_none() || minus == out || plus == minus {
                        return None;
                    }
                    bind[index(Sym::P)] = Some(plus);
                    bind[index(Sym::M)] = Some(minus);
                }
                Inputs::Passive | Inputs::Chain => return None,
            }
        }
    }
    let passives: Vec<usize> = net
        .parts
        .iter()
        .enumerate()
        .filter(|(_, p)| p.kind != PartKind::OpAmp)
        .map(|(i, _)| i)
        .collect();
    let n_required = layout.slots.iter().filter(|s| !s.optional).count();
    if passives.len() < n_required || passives.len() > layout.slots.len() {
        return None;
    }
    let mut placed: Vec<Option<usize>> = vec![None; layout.slots.len()];
    let mut used = vec![false; net.parts.len()];
    if search(layout, net, 0, &mut bind, &mut placed, &mut used) {
        // Every passive part must have found a slot.
        let n_placed = placed.iter().flatten().count();
        (n_placed == passives.len()).then_some(placed)
    } else {
        None
    }
}

/// Depth-first assignment of parts to slots with symbol binding; layouts have at most eight
/// slots, so the search is small.
fn search(
    layout: &Layout,
    net: &StageNetlist,
    slot_idx: usize,
    bind: &mut [Option<Node>; 6],
    placed: &mut Vec<Option<usize>>,
    used: &mut Vec<bool>,
) -> bool {
    let Some(slot) = layout.slots.get(slot_idx) else {
        return true;
    };
    for (part_idx, part) in net.parts.iter().enumerate() {
        if used[part_idx] || part.kind != slot.kind {
            continue;
        }
        let [a, b] = match part.nodes.as_slice() {
            [a, b] => [*a, *b],
            _ => continue,
        };
        for (first, second) in [(a, b), (b, a)] {
            let saved = *bind;
            if try_bind(bind, slot.ends.0, first) && try_bind(bind, slot.ends.1, second) {
                used[part_idx] = true;
                placed[slot_idx] = Some(part_idx);
                if search(layout, net, slot_idx + 1, bind, placed, used) {
                    return true;
                }
                used[part_idx] = false;
                placed[slot_idx] = None;
            }
            *bind = saved;
        }
    }
    if slot.optional {
        placed[slot_idx] = None;
        return search(layout, net, slot_idx + 1, bind, placed, used);
    }
    false
}

fn try_bind(bind: &mut [Option<Node>; 6], sym: Sym, node: Node) -> bool {
    let slot = &mut bind[sym as usize];
    match slot {
        Some(bound) => *bound == node,
        None => {
            // An inner node is a node of its own: not ground and not already another symbol.
            if node.is_none() {
                return false;
            }
            let taken = [Sym::In, Sym::A, Sym::P, Sym::M, Sym::O]
                .iter()
                .any(|&other| other != sym && bind[other as usize] == Some(node));
            if taken {
                return false;
            }
            bind[sym as usize] = Some(node);
            true
        }
    }
}
