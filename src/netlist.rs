//! The netlist IR that every view renders: modules with ports, scalar nets and instances of
//! cells or other modules, plus the structural checks that run before anything is written.

use crate::cells::{Cell, CellKind, Dir, Library};
use crate::error::{Error, Result};
use std::collections::{BTreeMap, HashMap};

#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct NetId(pub u32);

#[derive(Debug, Clone, PartialEq)]
pub struct Net {
    /// The scalar name, identical in every view (`c4_n`, `a3`).
    pub name: String,
    /// Set for a bit of a bus port of the top module: (bus name, bit). Verilog prints
    /// `a[3]`, SPICE prints the scalar name `a3`.
    pub bus: Option<(String, usize)>,
}

#[derive(Debug, Clone, PartialEq)]
pub struct Port {
    pub name: String,
    pub dir: Dir,
    /// Bits, least significant first; one entry for a scalar port.
    pub bits: Vec<NetId>,
    pub bus: bool,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Master {
    Cell(CellKind),
    /// Index into `Design::modules`.
    Module(usize),
}

#[derive(Debug, Clone, PartialEq)]
pub struct Instance {
    pub name: String,
    pub master: Master,
    /// One net per pin of the master, in pin order (ports' bits flattened for modules).
    pub conns: Vec<NetId>,
    /// The bit column the instance sits in, in its module's coordinates (a block's cells
    /// from 0, the top's from bit 0): wire lengths are measured in bit pitches between
    /// columns.
    pub col: u32,
}

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Module {
    pub name: String,
    pub ports: Vec<Port>,
    pub nets: Vec<Net>,
    pub instances: Vec<Instance>,
    names: HashMap<String, NetId>,
}

impl Module {
    pub fn new(name: impl Into<String>) -> Self {
        Module {
            name: name.into(),
            ..Default::default()
        }
    }
    /// A new net; names are unique within a module.
    pub fn net(&mut self, name: impl Into<String>) -> NetId {
        let name = name.into();
        assert!(
            !self.names.contains_key(&name),
            "net {name} defined twice in {}",
            self.name
        );
        let id = NetId(self.nets.len() as u32);
        self.names.insert(name.clone(), id);
        self.nets.push(Net { name, bus: None });
        id
    }
    pub fn port(&mut self, name: &str, dir: Dir) -> NetId {
        let id = self.net(name);
        self.ports.push(Port {
            name: name.into(),
            dir,
            bits: vec![id],
            bus: false,
        });
        id
    }
    /// A bus port of `width` bits whose bit nets are named `<name><bit>`.
    pub fn bus(&mut self, name: &str, dir: Dir, width: usize) -> Vec<NetId> {
        let bits: Vec<NetId> = (0..width)
            .map(|i| {
                let id = self.net(format!("{name}{i}"));
                self.nets[id.0 as usize].bus = Some((name.to_string(), i));
                id
            })
            .collect();
        self.ports.push(Port {
            name: name.into(),
            dir,
            bits: bits.clone(),
            bus: true,
        });
        bits
    }
    pub fn inst(&mut self, name: impl Into<String>, master: Master, conns: Vec<NetId>) {
        self.inst_at(0, name, master, conns);
    }
    /// An instance placed in bit column `col` of this module.
    pub fn inst_at(
        &mut self,
        col: usize,
        name: impl Into<String>,
        master: Master,
        conns: Vec<NetId>,
    ) {
        self.instances.push(Instance {
            name: name.into(),
            master,
            conns,
            col: col as u32,
        });
    }
    pub fn net_name(&self, id: NetId) -> &str {
        &self.nets[id.0 as usize].name
    }
    /// Port bits in declaration order, with their direction.
    pub fn pin_dirs(&self) -> Vec<(NetId, Dir)> {
        self.ports
            .iter()
            .flat_map(|p| p.bits.iter().map(move |&b| (b, p.dir)))
            .collect()
    }
}

/// A whole design: the cells it uses and its modules, children before parents, top last.
#[derive(Debug, Clone)]
pub struct Design {
    pub name: String,
    pub cells: BTreeMap<CellKind, Cell>,
    pub modules: Vec<Module>,
    /// Dynamic designs have `clk` as the first top port.
    pub dynamic: bool,
    /// Prefix and lookahead adders: the graph's counts, as built.
    pub prefix: Option<crate::arch::prefix::Report>,
}

impl Design {
    pub fn top(&self) -> &Module {
        self.modules.last().expect("a design has a top module")
    }
    /// Name printed for a cell or module master.
    pub fn master_name(&self, m: Master) -> String {
        match m {
            Master::Cell(k) => format!("{}_{}", self.name, self.cells[&k].base),
            Master::Module(i) => self.modules[i].name.clone(),
        }
    }
    /// Pin directions of a master, in connection order.
    pub fn master_dirs(&self, m: Master) -> Vec<Dir> {
        match m {
            Master::Cell(k) => self.cells[&k].pins.iter().map(|p| p.dir).collect(),
            Master::Module(i) => self.modules[i]
                .pin_dirs()
                .into_iter()
                .map(|(_, d)| d)
                .collect(),
        }
    }
    /// Transistor count of a master, recursively.
    pub fn transistors(&self, m: Master) -> usize {
        match m {
            Master::Cell(k) => self.cells[&k].devices.len(),
            Master::Module(i) => self.modules[i]
                .instances
                .iter()
                .map(|x| self.transistors(x.master))
                .sum(),
        }
    }
    /// Number of leaf cell instances of each kind in the whole design.
    pub fn cell_counts(&self) -> BTreeMap<CellKind, usize> {
        let mut out = BTreeMap::new();
        self.count_into(self.modules.len() - 1, 1, &mut out);
        out
    }
    fn count_into(&self, m: usize, mult: usize, out: &mut BTreeMap<CellKind, usize>) {
        for inst in &self.modules[m].instances {
            match inst.master {
                Master::Cell(k) => *out.entry(k).or_default() += mult,
                Master::Module(c) => self.count_into(c, mult, out),
            }
        }
    }

    /// Longest path from a top input to a top output, in gate stages (each cell's `stages`).
    pub fn logic_depth(&self) -> usize {
        let flat = self.flatten();
        let Ok(order) = flat.order(self) else {
            return 0;
        };
        let mut depth = vec![0usize; flat.names.len()];
        let mut best = 0;
        for li in order {
            let leaf = &flat.leaves[li];
            let cell = &self.cells[&leaf.kind];
            let din = cell
                .pins
                .iter()
                .zip(&leaf.nets)
                .filter(|(p, _)| p.dir == Dir::In)
                .map(|(_, &n)| depth[n as usize])
                .max()
                .unwrap_or(0);
            for (p, &n) in cell.pins.iter().zip(&leaf.nets) {
                if p.dir == Dir::Out {
                    depth[n as usize] = din + cell.stages;
                    best = best.max(din + cell.stages);
                }
            }
        }
        best
    }

    /// Flatten to leaf cell instances over global net ids.
    pub fn flatten(&self) -> Flat {
        let mut flat = Flat::default();
        let top = self.modules.len() - 1;
        let ports: Vec<u32> = self.modules[top]
            .pin_dirs()
            .iter()
            .map(|(id, _)| {
                let g = flat.new_net(self.modules[top].net_name(*id).to_string());
                flat.owner.push((top, *id));
                g
            })
            .collect();
        flat.top_ports = ports.clone();
        self.flatten_into(top, &ports, "", 0, &mut flat);
        flat
    }
    fn flatten_into(&self, m: usize, port_nets: &[u32], prefix: &str, col: u32, flat: &mut Flat) {
        let module = &self.modules[m];
        let mut map: HashMap<NetId, u32> = HashMap::new();
        for ((id, _), &g) in module.pin_dirs().iter().zip(port_nets) {
            map.insert(*id, g);
        }
        for (i, net) in module.nets.iter().enumerate() {
            map.entry(NetId(i as u32)).or_insert_with(|| {
                let g = flat.new_net(format!("{prefix}{}", net.name));
                flat.owner.push((m, NetId(i as u32)));
                g
            });
        }
        for inst in &module.instances {
            let conns: Vec<u32> = inst.conns.iter().map(|c| map[c]).collect();
            let path = format!("{prefix}{}.", inst.name);
            match inst.master {
                Master::Cell(kind) => flat.leaves.push(Leaf {
                    path: format!("{prefix}{}", inst.name),
                    kind,
                    nets: conns,
                    col: col + inst.col,
                }),
                Master::Module(c) => self.flatten_into(c, &conns, &path, col + inst.col, flat),
            }
        }
    }

    /// Wire length of every net, in bit pitches, by the module that owns it (a module's own
    /// nets; the top's ports too): the distance between the farthest bit columns of the leaf
    /// cells the net reaches. A module's nets have the same length in each of its instances,
    /// so every net's wire is counted once, in its owner.
    pub fn wire_spans(&self) -> BTreeMap<(usize, NetId), u32> {
        let flat = self.flatten();
        let spans = flat.wire_spans();
        let mut out = BTreeMap::new();
        for (g, &(m, id)) in flat.owner.iter().enumerate() {
            if spans[g] > 0 {
                out.entry((m, id)).or_insert(spans[g]);
            }
        }
        out
    }

    /// Structural checks of every module and of the flattened design (no combinational loop).
    pub fn check(&self) -> Result<()> {
        for (mi, m) in self.modules.iter().enumerate() {
            self.check_module(mi, m)?;
        }
        self.flatten().order(self)?;
        Ok(())
    }

    fn check_module(&self, mi: usize, m: &Module) -> Result<()> {
        let fail = |msg: String| Err(Error::Check(format!("{}: {msg}", m.name)));
        let mut drivers = vec![0usize; m.nets.len()];
        let mut readers = vec![0usize; m.nets.len()];
        for (id, dir) in m.pin_dirs() {
            match dir {
                Dir::In => drivers[id.0 as usize] += 1,
                Dir::Out => readers[id.0 as usize] += 1,
            }
        }
        for inst in &m.instances {
            if let Master::Module(c) = inst.master {
                if c >= mi {
                    return fail(format!("instance {} refers to a later module", inst.name));
                }
            }
            let dirs = self.master_dirs(inst.master);
            if dirs.len() != inst.conns.len() {
                return fail(format!(
                    "instance {} has {} connections for {} pins",
                    inst.name,
                    inst.conns.len(),
                    dirs.len()
                ));
            }
            for (c, d) in inst.conns.iter().zip(dirs) {
                match d {
                    Dir::In => readers[c.0 as usize] += 1,
                    Dir::Out => drivers[c.0 as usize] += 1,
                }
            }
        }
        for (i, net) in m.nets.iter().enumerate() {
            if drivers[i] != 1 {
                return fail(format!(
                    "net {} has {} drivers (each net needs exactly one)",
                    net.name, drivers[i]
                ));
            }
            if readers[i] == 0 {
                return fail(format!("net {} is driven but never used", net.name));
            }
        }
        Ok(())
    }
}

/// A leaf cell instance over global nets.
#[derive(Debug, Clone)]
pub struct Leaf {
    pub path: String,
    pub kind: CellKind,
    pub nets: Vec<u32>,
    /// Absolute bit column.
    pub col: u32,
}

#[derive(Debug, Clone, Default)]
pub struct Flat {
    pub names: Vec<String>,
    /// The module net each global net of `names` was made for (module index, net).
    pub owner: Vec<(usize, NetId)>,
    pub leaves: Vec<Leaf>,
    /// Global nets of the top module's port bits, in port order.
    pub top_ports: Vec<u32>,
}

/// A leaf cell's node names mapped to global node ids, for the transistor-level views
/// (the keeper survey, the timing engine): pins to their nets, `vdd` / `vss` to the rails, and
/// each cell-internal node to a new id named `PATH.NODE`, appended to `names` on first use.
pub struct LeafNodes<'a> {
    path: &'a str,
    local: HashMap<String, u32>,
}

impl LeafNodes<'_> {
    /// The id of node `n`, and whether it was created by this call.
    pub fn id(&mut self, n: &str, names: &mut Vec<String>) -> (u32, bool) {
        if let Some(&g) = self.local.get(n) {
            return (g, false);
        }
        names.push(format!("{}.{n}", self.path));
        let g = (names.len() - 1) as u32;
        self.local.insert(n.to_string(), g);
        (g, true)
    }
}

impl Flat {
    /// The node map of leaf `leaf`, with the rails at ids `vss` and `vdd`.
    pub fn leaf_nodes(&self, design: &Design, leaf: usize, vss: u32, vdd: u32) -> LeafNodes<'_> {
        let l = &self.leaves[leaf];
        let cell = &design.cells[&l.kind];
        let mut local: HashMap<String, u32> = cell
            .pins
            .iter()
            .zip(&l.nets)
            .map(|(p, &g)| (p.name.to_string(), g))
            .collect();
        local.insert("vss".into(), vss);
        local.insert("vdd".into(), vdd);
        LeafNodes {
            path: &l.path,
            local,
        }
    }

    /// Every net's wire length in bit pitches: the distance between the farthest bit
    /// columns of the leaves on it (0 for a net inside one column). Indexed like `owner`.
    pub fn wire_spans(&self) -> Vec<u32> {
        let n = self.owner.len();
        let mut lo = vec![u32::MAX; n];
        let mut hi = vec![0u32; n];
        for l in &self.leaves {
            for &g in &l.nets {
                let g = g as usize;
                if g < n {
                    lo[g] = lo[g].min(l.col);
                    hi[g] = hi[g].max(l.col);
                }
            }
        }
        (0..n)
            .map(|g| if lo[g] == u32::MAX { 0 } else { hi[g] - lo[g] })
            .collect()
    }
    fn new_net(&mut self, name: String) -> u32 {
        self.names.push(name);
        (self.names.len() - 1) as u32
    }
    /// Leaves in evaluation order (every input computed before it is read), or the net on a
    /// combinational loop.
    pub fn order(&self, design: &Design) -> Result<Vec<usize>> {
        let n = self.names.len();
        let mut driver: Vec<Option<usize>> = vec![None; n];
        for (li, leaf) in self.leaves.iter().enumerate() {
            let cell = &design.cells[&leaf.kind];
            for (p, &g) in cell.pins.iter().zip(&leaf.nets) {
                if p.dir == Dir::Out {
                    driver[g as usize] = Some(li);
                }
            }
        }
        let mut indeg = vec![0usize; self.leaves.len()];
        let mut users: Vec<Vec<usize>> = vec![vec![]; self.leaves.len()];
        let read: HashMap<CellKind, Vec<bool>> = design
            .cells
            .iter()
            .map(|(k, c)| (*k, c.read_by_logic()))
            .collect();
        for (li, leaf) in self.leaves.iter().enumerate() {
            let cell = &design.cells[&leaf.kind];
            let read = &read[&leaf.kind];
            for ((p, &g), &r) in cell.pins.iter().zip(&leaf.nets).zip(read) {
                // A pin no logic function reads (a keeper's gate) orders nothing.
                if p.dir == Dir::In && r {
                    if let Some(d) = driver[g as usize] {
                        indeg[li] += 1;
                        users[d].push(li);
                    }
                }
            }
        }
        let mut ready: Vec<usize> = (0..self.leaves.len()).filter(|&i| indeg[i] == 0).collect();
        ready.reverse();
        let mut out = Vec::with_capacity(self.leaves.len());
        while let Some(i) = ready.pop() {
            out.push(i);
            for &u in users[i].iter().rev() {
                indeg[u] -= 1;
                if indeg[u] == 0 {
                    ready.push(u);
                }
            }
        }
        if out.len() != self.leaves.len() {
            let stuck = (0..self.leaves.len()).find(|&i| indeg[i] > 0).unwrap_or(0);
            return Err(Error::Check(format!(
                "combinational loop through {}",
                self.leaves[stuck].path
            )));
        }
        Ok(out)
    }
}

/// Collects the cells a builder uses.
pub struct DesignBuilder<'a> {
    pub name: String,
    pub lib: &'a Library,
    pub cells: BTreeMap<CellKind, Cell>,
    pub modules: Vec<Module>,
}

impl<'a> DesignBuilder<'a> {
    pub fn new(name: &str, lib: &'a Library) -> Self {
        DesignBuilder {
            name: name.into(),
            lib,
            cells: BTreeMap::new(),
            modules: vec![],
        }
    }
    /// A cell master, registering the cell on first use.
    pub fn cell(&mut self, kind: CellKind) -> Master {
        self.cells
            .entry(kind)
            .or_insert_with(|| self.lib.cell(kind));
        Master::Cell(kind)
    }
    pub fn add_module(&mut self, m: Module) -> Master {
        self.modules.push(m);
        Master::Module(self.modules.len() - 1)
    }
    pub fn finish(self, top: Module, dynamic: bool) -> Design {
        let mut modules = self.modules;
        modules.push(top);
        Design {
            name: self.name,
            cells: self.cells,
            modules,
            dynamic,
            prefix: None,
        }
    }
}
