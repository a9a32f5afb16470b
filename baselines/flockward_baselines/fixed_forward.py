"""A saved SB3 policy's deterministic action, computed the same way on every x86-64 CPU.

``model.predict`` runs the network in torch, whose matrix products (MKL) and activations pick
kernels by the CPU: an AVX-512 server and an AVX2 laptop round differently in the last bits,
and a flock's chaotic response turns that into another episode, so a committed result file would
replay only on the machine kind that wrote it. Here the same network is evaluated in float64
(the float32 weights converted exactly) with every sum taken in index order and the activations
from the C library one value at a time: the action agrees with ``model.predict`` to float32
rounding (tests/test_fixed_forward.py) and is the same bits on every CPU.

Covered: the multilayer perceptrons of Stable-Baselines3's default policies on a Box
observation: PPO and A2C (mean of the Gaussian, clipped to the action box, as ``predict`` does)
and SAC, TD3 and DDPG (the tanh-squashed actor, rescaled to the action box). Any other network
(images, custom extractors, state-dependent exploration) returns None from ``fixed_forward``,
and the caller falls back to ``model.predict``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from flockward.sim.jit import compiled

# Activation codes of the compiled layer.
LINEAR, TANH, RELU = 0, 1, 2


@compiled
def _dense(x: np.ndarray, weight: np.ndarray, bias: np.ndarray, activation: int) -> np.ndarray:
    """activation(W x + b), each row summed over j in index order, in float64."""
    out = np.empty(weight.shape[0])
    for k in range(weight.shape[0]):
        acc = bias[k]
        for j in range(weight.shape[1]):
            acc += weight[k, j] * x[j]
        if activation == TANH:
            acc = math.tanh(acc)
        elif activation == RELU:
            acc = acc if acc > 0.0 else 0.0
        out[k] = acc
    return out


@dataclass(frozen=True)
class Dense:
    """One fully connected layer and the activation after it."""

    weight: np.ndarray  # (out, in) float64
    bias: np.ndarray  # (out,) float64
    activation: int


@dataclass(frozen=True)
class FixedForward:
    """A policy network as float64 layers; ``squashed``: tanh on the output, then rescaled to
    the action box (SAC, TD3, DDPG); otherwise clipped to it (PPO, A2C)."""

    layers: tuple[Dense, ...]
    low: np.ndarray
    high: np.ndarray
    squashed: bool

    def __call__(self, observation: np.ndarray) -> np.ndarray:
        """The deterministic action for one flat observation."""
        x = np.asarray(observation, dtype=np.float64).reshape(-1)
        if x.shape[0] != self.layers[0].weight.shape[1]:
            raise ValueError(
                f"observation of {x.shape[0]} values: the policy takes "
                f"{self.layers[0].weight.shape[1]}"
            )
        for layer in self.layers:
            x = _dense(x, layer.weight, layer.bias, layer.activation)
        if self.squashed:
            unit = np.array([math.tanh(float(value)) for value in x])
            return self.low + 0.5 * (unit + 1.0) * (self.high - self.low)
        clipped: np.ndarray = np.clip(x, self.low, self.high)
        return clipped


def _layers(modules: list[Any]) -> list[Dense] | None:
    """torch modules (Linear and Tanh/ReLU in sequence) as Dense layers; None if another kind."""
    import torch.nn as nn

    layers: list[Dense] = []
    for module in modules:
        if isinstance(module, nn.Linear):
            weight = module.weight.detach().cpu().numpy().astype(np.float64)
            bias = module.bias.detach().cpu().numpy().astype(np.float64)
            layers.append(Dense(np.ascontiguousarray(weight), bias, LINEAR))
        elif isinstance(module, (nn.Tanh, nn.ReLU)) and layers and layers[-1].activation == LINEAR:
            code = TANH if isinstance(module, nn.Tanh) else RELU
            layers[-1] = Dense(layers[-1].weight, layers[-1].bias, code)
        elif isinstance(module, nn.Sequential):
            inner = _layers(list(module))
            if inner is None:
                return None
            layers.extend(inner)
        else:
            return None
    return layers


def fixed_forward(model: Any) -> FixedForward | None:
    """The float64 fixed-order network of an SB3 model's deterministic action, or None if its
    policy is not one the module covers (see the module docstring)."""
    import gymnasium as gym
    import torch.nn as nn
    from stable_baselines3.common.torch_layers import FlattenExtractor

    policy = model.policy
    space = model.action_space
    if not isinstance(space, gym.spaces.Box) or not isinstance(
        model.observation_space, gym.spaces.Box
    ):
        return None
    if getattr(policy, "use_sde", False):
        return None
    actor = getattr(policy, "actor", None)
    if actor is not None:  # SAC, TD3, DDPG: the actor's own extractor and layers
        if not isinstance(actor.features_extractor, FlattenExtractor):
            return None
        if hasattr(actor, "latent_pi"):  # SAC: latent_pi, mu, then tanh
            if getattr(actor, "use_sde", False):
                return None
            layers = _layers([actor.latent_pi, actor.mu])
        else:  # TD3, DDPG: mu ends with its own Tanh
            modules = list(actor.mu)
            if not modules or not isinstance(modules[-1], nn.Tanh):
                return None
            layers = _layers(modules[:-1])
        squashed = True
    else:  # PPO, A2C: the policy branch of the shared-or-not MLP, then the mean
        extractor = getattr(policy, "pi_features_extractor", policy.features_extractor)
        if not isinstance(extractor, FlattenExtractor) or getattr(policy, "squash_output", False):
            return None
        layers = _layers([policy.mlp_extractor.policy_net, policy.action_net])
        squashed = False
    if not layers:
        return None
    low = np.asarray(space.low, dtype=np.float64).reshape(-1)
    high = np.asarray(space.high, dtype=np.float64).reshape(-1)
    return FixedForward(tuple(layers), low, high, squashed)
