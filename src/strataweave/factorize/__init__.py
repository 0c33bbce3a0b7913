"""factorize layer (see DESIGN.md): graph-regularised joint NMF and the patient labeller."""

from strataweave.factorize.joint_nmf import JointNMF
from strataweave.factorize.labels import label_patients, partition_factor, scores_for_labels

__all__ = ["JointNMF", "label_patients", "partition_factor", "scores_for_labels"]
