"""Generators and discriminators for the demo tiles (DCGAN-style, 32x32 RGB).

Generators take `z` [N, 64] (and `kind` [N] int64 for the conditional one) and
return `image` [N, 3, 32, 32] in [-1, 1]. The reshape to [N, C, 1, 1] happens
inside the model so the exported ONNX input is a plain [N, 64] matrix.
"""

from __future__ import annotations

import torch
from torch import nn

LATENT = 64
NUM_KINDS = 4
KIND_EMBED = 16
NGF = 40  # generator width
NDF = 40  # discriminator width


def _body(in_ch: int, ngf: int = NGF) -> nn.Sequential:
    return nn.Sequential(
        # [N, in_ch, 1, 1] -> [N, 4ngf, 4, 4]
        nn.ConvTranspose2d(in_ch, ngf * 4, 4, 1, 0, bias=False),
        nn.BatchNorm2d(ngf * 4),
        nn.ReLU(True),
        # -> [N, 2ngf, 8, 8]
        nn.ConvTranspose2d(ngf * 4, ngf * 2, 4, 2, 1, bias=False),
        nn.BatchNorm2d(ngf * 2),
        nn.ReLU(True),
        # -> [N, ngf, 16, 16]
        nn.ConvTranspose2d(ngf * 2, ngf, 4, 2, 1, bias=False),
        nn.BatchNorm2d(ngf),
        nn.ReLU(True),
        # -> [N, 3, 32, 32]
        nn.ConvTranspose2d(ngf, 3, 4, 2, 1, bias=False),
        nn.Tanh(),
    )


class TileGenerator(nn.Module):
    """Unconditional generator: z [N, 64] -> image [N, 3, 32, 32]."""

    def __init__(self, latent: int = LATENT, ngf: int = NGF):
        super().__init__()
        self.latent = latent
        self.body = _body(latent, ngf)

    def forward(self, z: torch.Tensor) -> torch.Tensor:
        return self.body(z[:, :, None, None])


class KindTileGenerator(nn.Module):
    """Class-conditional generator: z [N, 64], kind [N] int64 -> image [N, 3, 32, 32]."""

    def __init__(self, latent: int = LATENT, kinds: int = NUM_KINDS, embed: int = KIND_EMBED, ngf: int = NGF):
        super().__init__()
        self.latent = latent
        self.embed = nn.Embedding(kinds, embed)
        self.body = _body(latent + embed, ngf)

    def forward(self, z: torch.Tensor, kind: torch.Tensor) -> torch.Tensor:
        h = torch.cat([z, self.embed(kind)], dim=1)
        return self.body(h[:, :, None, None])


def _features(ndf: int = NDF) -> nn.Sequential:
    return nn.Sequential(
        # [N, 3, 32, 32] -> [N, ndf, 16, 16]
        nn.Conv2d(3, ndf, 4, 2, 1, bias=False),
        nn.LeakyReLU(0.2, True),
        # -> [N, 2ndf, 8, 8]
        nn.Conv2d(ndf, ndf * 2, 4, 2, 1, bias=False),
        nn.BatchNorm2d(ndf * 2),
        nn.LeakyReLU(0.2, True),
        # -> [N, 4ndf, 4, 4]
        nn.Conv2d(ndf * 2, ndf * 4, 4, 2, 1, bias=False),
        nn.BatchNorm2d(ndf * 4),
        nn.LeakyReLU(0.2, True),
    )


class TileDiscriminator(nn.Module):
    """image -> real/fake logit [N]."""

    def __init__(self, ndf: int = NDF):
        super().__init__()
        self.features = _features(ndf)
        self.out = nn.Conv2d(ndf * 4, 1, 4, 1, 0)

    def forward(self, x: torch.Tensor) -> torch.Tensor:
        return self.out(self.features(x)).flatten()


class KindMinibatchStd(nn.Module):
    """Append one channel holding, for each sample, the average feature standard deviation over
    the batch samples of its own kind (a per-kind form of Karras et al. 2018's minibatch
    standard deviation): a generator that ignores z gives near-zero values there, real tiles do not."""

    def __init__(self, kinds: int = NUM_KINDS):
        super().__init__()
        self.kinds = kinds

    def forward(self, h: torch.Tensor, kind: torch.Tensor) -> torch.Tensor:
        onehot = nn.functional.one_hot(kind, self.kinds).to(h.dtype)  # [N, K]
        count = onehot.sum(0).clamp(min=1.0)[:, None]
        flat = h.flatten(1)
        mean = onehot.t() @ flat / count
        var = (onehot.t() @ (flat * flat) / count - mean * mean).clamp(min=0.0)
        std = torch.sqrt(var + 1e-8).mean(1)  # [K]
        per_sample = (onehot @ std)[:, None, None, None]
        return torch.cat([h, per_sample.expand(-1, 1, h.shape[2], h.shape[3])], dim=1)


class KindTileDiscriminator(nn.Module):
    """Label-channel conditioning: the image gets four one-hot kind planes (3 + 4 input
    channels), and a per-kind minibatch standard-deviation channel before the last layer."""

    def __init__(self, kinds: int = NUM_KINDS, ndf: int = NDF):
        super().__init__()
        self.kinds = kinds
        self.features = nn.Sequential(
            nn.Conv2d(3 + kinds, ndf, 4, 2, 1, bias=False),
            nn.LeakyReLU(0.2, True),
            *list(_features(ndf).children())[2:],
        )
        self.stddev = KindMinibatchStd(kinds)
        self.out = nn.Conv2d(ndf * 4 + 1, 1, 4, 1, 0)

    def forward(self, x: torch.Tensor, kind: torch.Tensor) -> torch.Tensor:
        planes = nn.functional.one_hot(kind, self.kinds).to(x.dtype)[:, :, None, None]
        planes = planes.expand(-1, -1, x.shape[2], x.shape[3])
        h = self.features(torch.cat([x, planes], dim=1))
        return self.out(self.stddev(h, kind)).flatten()


def dcgan_init(module: nn.Module) -> None:
    """Weights N(0, 0.02) for convolutions, N(1, 0.02) for BatchNorm scales (Radford et al. 2016)."""
    for m in module.modules():
        if isinstance(m, (nn.Conv2d, nn.ConvTranspose2d)):
            nn.init.normal_(m.weight, 0.0, 0.02)
            if m.bias is not None:
                nn.init.zeros_(m.bias)
        elif isinstance(m, nn.BatchNorm2d):
            nn.init.normal_(m.weight, 1.0, 0.02)
            nn.init.zeros_(m.bias)


def count_params(module: nn.Module) -> int:
    return sum(p.numel() for p in module.parameters())
