//! The campaign tree of the browse screen: sites, layers and samples with their fit standing,
//! which nodes are open, the filter, and the visible rows.

#[allow(clippy::wildcard_imports)] // the state's shared imports and helpers
use super::*;

/// A sample in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleNode {
    /// Database id.
    pub id: i64,
    /// Code.
    pub code: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Model of the current fit.
    pub model: Option<String>,
    /// Fit standing.
    pub tag: FitTag,
    /// Live flags on its readings (suggested or accepted).
    pub flags: usize,
}

/// A layer in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct LayerNode {
    /// Database id.
    pub id: i64,
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<crate::model::texture::TextureClass>,
    /// Its samples, by code.
    pub samples: Vec<SampleNode>,
}

impl LayerNode {
    /// `0-20 cm`.
    pub fn depth_label(&self) -> String {
        format!("{}-{} cm", self.top_cm, self.bottom_cm)
    }
}

/// A site in the tree.
#[derive(Debug, Clone, PartialEq)]
pub struct SiteNode {
    /// Code.
    pub code: String,
    /// Descriptive name.
    pub name: Option<String>,
    /// Its layers, top down.
    pub layers: Vec<LayerNode>,
}

impl SiteNode {
    /// Every sample of the site.
    pub fn samples(&self) -> impl Iterator<Item = &SampleNode> {
        self.layers.iter().flat_map(|l| l.samples.iter())
    }
}

/// One visible line of the tree: indices into the sites, layers and samples.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TreeRow {
    /// A site.
    Site(usize),
    /// A layer of a site.
    Layer(usize, usize),
    /// A sample of a layer.
    Sample(usize, usize, usize),
}

impl TreeRow {
    /// The site index.
    pub fn site(self) -> usize {
        match self {
            TreeRow::Site(s) | TreeRow::Layer(s, _) | TreeRow::Sample(s, _, _) => s,
        }
    }
}

/// A node that can be expanded: a site, or a layer of a site.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum NodeKey {
    /// Site index.
    Site(usize),
    /// Site and layer index.
    Layer(usize, usize),
}

/// The campaign tree: the outline, what is expanded, the filter and the cursor.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Tree {
    /// Sites by code.
    pub sites: Vec<SiteNode>,
    /// Expanded sites and layers (layers start expanded once their site is).
    pub expanded: BTreeSet<NodeKey>,
    /// Collapsed layers (so a site opens with its layers open).
    pub collapsed_layers: BTreeSet<NodeKey>,
    /// Text filter on codes, horizons and site names (case-insensitive); empty for none.
    pub filter: String,
    /// The visible rows, rebuilt whenever the outline, the expansion or the filter changes.
    pub rows: Vec<TreeRow>,
    /// Index into `rows`.
    pub cursor: usize,
}

impl Tree {
    /// Build the tree from the store's outline, fit summaries and flag counts.
    pub fn from_outline(
        outline: &Outline,
        summaries: &HashMap<i64, FitSummary>,
        flags: &HashMap<i64, usize>,
    ) -> Tree {
        let mut sites: Vec<SiteNode> = outline
            .sites
            .iter()
            .map(|s| SiteNode {
                code: s.code.clone(),
                name: s.name.clone(),
                layers: Vec::new(),
            })
            .collect();
        let site_index: HashMap<i64, usize> = outline
            .sites
            .iter()
            .enumerate()
            .map(|(i, s)| (s.id, i))
            .collect();
        let mut layer_index: HashMap<i64, (usize, usize)> = HashMap::new();
        for layer in &outline.layers {
            let Some(&si) = site_index.get(&layer.site_id) else {
                continue;
            };
            layer_index.insert(layer.id, (si, sites[si].layers.len()));
            sites[si].layers.push(LayerNode {
                id: layer.id,
                top_cm: layer.at.top_cm,
                bottom_cm: layer.at.bottom_cm,
                horizon: layer.horizon.clone(),
                texture: layer.texture,
                samples: Vec::new(),
            });
        }
        for sample in &outline.samples {
            let Some(&(si, li)) = layer_index.get(&sample.layer_id) else {
                continue;
            };
            let summary = summaries.get(&sample.id);
            sites[si].layers[li].samples.push(SampleNode {
                id: sample.id,
                code: sample.code.clone(),
                kind: sample.kind,
                model: summary.and_then(|s| s.model.clone()),
                tag: summary.map_or(FitTag::None, |s| FitTag::of(&s.state)),
                flags: flags.get(&sample.id).copied().unwrap_or(0),
            });
        }
        let mut tree = Tree {
            sites,
            ..Tree::default()
        };
        tree.rebuild();
        tree
    }

    /// Whether a row matches the filter (a site or layer matches when any sample below does).
    fn sample_matches(&self, site: &SiteNode, layer: &LayerNode, sample: &SampleNode) -> bool {
        if self.filter.is_empty() {
            return true;
        }
        let needle = self.filter.to_lowercase();
        let hay = [
            Some(sample.code.as_str()),
            layer.horizon.as_deref(),
            Some(site.code.as_str()),
            site.name.as_deref(),
            sample.model.as_deref(),
        ];
        hay.iter()
            .flatten()
            .any(|h| h.to_lowercase().contains(&needle))
    }

    /// Recompute the visible rows (keeping the cursor on the same node when it stays visible).
    pub fn rebuild(&mut self) {
        let keep = self.rows.get(self.cursor).copied();
        let filtering = !self.filter.is_empty();
        let mut rows = Vec::new();
        for (si, site) in self.sites.iter().enumerate() {
            let site_row = rows.len();
            let mut any = !filtering;
            let site_open = filtering || self.expanded.contains(&NodeKey::Site(si));
            if !filtering {
                rows.push(TreeRow::Site(si));
            }
            for (li, layer) in site.layers.iter().enumerate() {
                let matching: Vec<usize> = layer
                    .samples
                    .iter()
                    .enumerate()
                    .filter(|(_, s)| self.sample_matches(site, layer, s))
                    .map(|(i, _)| i)
                    .collect();
                if filtering && matching.is_empty() {
                    continue;
                }
                if filtering && !any {
                    rows.insert(site_row, TreeRow::Site(si));
                    any = true;
                }
                if !site_open {
                    continue;
                }
                rows.push(TreeRow::Layer(si, li));
                let layer_open =
                    filtering || !self.collapsed_layers.contains(&NodeKey::Layer(si, li));
                if layer_open {
                    rows.extend(matching.into_iter().map(|i| TreeRow::Sample(si, li, i)));
                }
            }
        }
        self.rows = rows;
        self.cursor = keep
            .and_then(|k| self.rows.iter().position(|r| *r == k))
            .unwrap_or_else(|| self.cursor.min(self.rows.len().saturating_sub(1)));
    }

    /// The row under the cursor.
    pub fn current(&self) -> Option<TreeRow> {
        self.rows.get(self.cursor).copied()
    }

    /// The sample under the cursor.
    pub fn current_sample(&self) -> Option<&SampleNode> {
        match self.current()? {
            TreeRow::Sample(s, l, i) => self.sites.get(s)?.layers.get(l)?.samples.get(i),
            _ => None,
        }
    }

    /// The site of the row under the cursor.
    pub fn current_site(&self) -> Option<&SiteNode> {
        self.sites.get(self.current()?.site())
    }

    /// Whether a site or layer row is open.
    pub fn is_open(&self, row: TreeRow) -> bool {
        match row {
            TreeRow::Site(s) => {
                !self.filter.is_empty() || self.expanded.contains(&NodeKey::Site(s))
            }
            TreeRow::Layer(s, l) => {
                !self.filter.is_empty() || !self.collapsed_layers.contains(&NodeKey::Layer(s, l))
            }
            TreeRow::Sample(..) => false,
        }
    }

    /// Where a sample sits, by id.
    pub fn find_sample(&self, id: i64) -> Option<(usize, usize, usize)> {
        for (si, site) in self.sites.iter().enumerate() {
            for (li, layer) in site.layers.iter().enumerate() {
                if let Some(i) = layer.samples.iter().position(|s| s.id == id) {
                    return Some((si, li, i));
                }
            }
        }
        None
    }

    /// The sample with this id.
    pub fn sample(&self, id: i64) -> Option<&SampleNode> {
        let (s, l, i) = self.find_sample(id)?;
        Some(&self.sites[s].layers[l].samples[i])
    }

    /// Open the way to a sample and put the cursor on it.
    pub fn reveal(&mut self, id: i64) -> bool {
        let Some((s, l, i)) = self.find_sample(id) else {
            return false;
        };
        self.expanded.insert(NodeKey::Site(s));
        self.collapsed_layers.remove(&NodeKey::Layer(s, l));
        self.rebuild();
        if let Some(pos) = self
            .rows
            .iter()
            .position(|r| *r == TreeRow::Sample(s, l, i))
        {
            self.cursor = pos;
            true
        } else {
            false
        }
    }

    /// Number of samples in the campaign.
    pub fn sample_count(&self) -> usize {
        self.sites.iter().map(|s| s.samples().count()).sum()
    }
}
