"""The 3D scene widget: pyqtgraph's GL view drawn two ways, and its labels painted in one pass.

* At rest the items are drawn into a multisample framebuffer of the widget's size (4 samples: smooth
  lines without per-line smoothing, which dots them) and copied into the widget's own framebuffer.
* While the camera moves (``set_moving(True)``) they are drawn straight into the widget's framebuffer,
  without multisampling: with a software renderer (llvmpipe) clearing and resolving four samples per
  pixel was the largest part of an empty frame.
* The labels (tick numbers, axis names) are plain data, ``(box position, text, QColor, QFont)``, painted
  with one QPainter after the items (one GL text item per label opened a QPainter per label per frame).
* ``render_image`` draws the same scene, multisampled, with its labels, into a picture of any size
  (reports and exports), without touching the widget's camera or size; ``framed_image`` first aims the
  camera (same direction) so that the data box with its labels fills the picture (report figures).

Imported with the 3D view only (it loads pyqtgraph.opengl).
"""

from __future__ import annotations

import itertools

import numpy as np
import pyqtgraph.opengl as gl
from OpenGL import GL
from PySide6.QtCore import QPointF
from PySide6.QtGui import QFontMetrics, QImage, QPainter, QSurfaceFormat, QVector3D
from PySide6.QtOpenGL import QOpenGLFramebufferObject, QOpenGLFramebufferObjectFormat, QOpenGLPaintDevice

SMOOTH_SAMPLES = 4


def paint_labels(painter: QPainter, labels, points) -> None:
    """Each label's text with its baseline starting at its pixel position (NaN: behind the camera, skipped)."""
    painter.setRenderHints(QPainter.RenderHint.Antialiasing | QPainter.RenderHint.TextAntialiasing)
    for (_pos, text, colour, font), (x, y) in zip(labels, points):
        if np.isfinite(x) and np.isfinite(y):
            painter.setPen(colour)
            painter.setFont(font)
            painter.drawText(QPointF(float(x), float(y)), text)


def _framebuffer(width: int, height: int, samples: int) -> QOpenGLFramebufferObject:
    fmt = QOpenGLFramebufferObjectFormat()
    fmt.setAttachment(QOpenGLFramebufferObject.Attachment.CombinedDepthStencil)
    fmt.setSamples(samples)
    return QOpenGLFramebufferObject(width, height, fmt)


class SceneWidget(gl.GLViewWidget):
    """A GLViewWidget multisampled at rest only, with ``labels`` painted over the items in one pass; the data
    sit in a box of half-size ``half`` around the origin."""

    def __init__(self, half: float, parent=None):
        super().__init__(parent)
        self.half = float(half)
        surface = QSurfaceFormat.defaultFormat()
        surface.setSamples(0)  # the widget's own framebuffer: the frames drawn while moving
        self.setFormat(surface)
        self.labels: list = []   # (box position (3,), text, QColor, QFont)
        self.moving = False
        self._smooth = None      # the multisample framebuffer of frames at rest (made at the widget's size)
        self._smooth_failed = False

    # ------------------------------------------------------------ state
    def set_moving(self, moving: bool) -> None:
        """Draw the next frames without multisampling (the camera moves) or with it (at rest)."""
        if moving != self.moving:
            self.moving = moving
            self.update()

    def smooth(self) -> bool:
        """Whether the frames at rest are multisampled (False where the driver offers no such framebuffer)."""
        return not self._smooth_failed

    def set_labels(self, labels) -> None:
        self.labels = list(labels)
        self.update()

    def pixel_points(self, points, width: int, height: int) -> np.ndarray:
        """Pixel positions (x right, y down) of box-coordinate ``points`` (N, 3) in a picture of ``width`` x
        ``height`` seen by this camera (NaN behind the camera)."""
        viewport = (0, 0, max(1, int(width)), max(1, int(height)))
        m = self.projectionMatrix(viewport, viewport) * self.viewMatrix()
        clip_of = np.array(m.data(), dtype=float).reshape(4, 4).T  # Qt keeps its matrices column by column
        pts = np.asarray(points, dtype=float).reshape(-1, 3)
        clip = np.column_stack([pts, np.ones(len(pts))]) @ clip_of.T
        with np.errstate(divide="ignore", invalid="ignore"):
            ndc = np.where(clip[:, 3:4] > 0, clip[:, :2] / clip[:, 3:4], np.nan)
        return np.column_stack([(ndc[:, 0] + 1) / 2 * width, (1 - ndc[:, 1]) / 2 * height])

    def label_points(self, width: int, height: int) -> np.ndarray:
        """Pixel positions of the labels in a picture of ``width`` x ``height``."""
        return self.pixel_points([pos for pos, *_rest in self.labels], width, height)

    # ------------------------------------------------------------ framing the box
    def frame_extent(self, width: int, height: int):
        """The pixel rectangle ((left, top), (right, bottom)) the box's corners and the text of the labels
        cover in a picture of ``width`` x ``height`` seen by this camera; None when part of it is behind."""
        corners = np.array(list(itertools.product((-self.half, self.half), repeat=3)))
        xy = self.pixel_points(np.vstack([corners] + [np.reshape(pos, (1, 3)) for pos, *_r in self.labels]),
                               width, height)
        if not np.all(np.isfinite(xy)):
            return None
        lo, hi = xy.copy(), xy.copy()  # a corner is a point, a label its text
        for k, (_pos, text, _colour, font) in enumerate(self.labels, start=len(corners)):
            rect = QFontMetrics(font).tightBoundingRect(text)  # drawn with its baseline starting at the point
            lo[k] += (rect.left(), rect.top())
            hi[k] += (rect.right(), rect.bottom())
        return lo.min(axis=0), hi.max(axis=0)

    def frame_fits(self, width: int, height: int, margin: float) -> bool:
        """Whether the box with its labels lies inside ``margin`` of the half-width and half-height of a
        picture of ``width`` x ``height`` from its middle."""
        w, h = max(1, int(width)), max(1, int(height))
        extent = self.frame_extent(w, h)
        if extent is None:
            return False
        (left, top), (right, bottom) = extent
        pad_x, pad_y = (1 - margin) * w / 2, (1 - margin) * h / 2
        return bool(left >= pad_x and right <= w - pad_x and top >= pad_y and bottom <= h - pad_y)

    def fitting_distance(self, width: int, height: int, margin: float) -> float:
        """The nearest camera distance (same direction, aim and field of view) at which the box with its
        labels fits (``frame_fits``) a picture of ``width`` x ``height``."""
        opts = self.opts
        saved = opts["distance"]
        try:
            near, far = self.half * 0.5, max(float(saved), self.half * 4)
            opts["distance"] = far
            while not self.frame_fits(width, height, margin) and far < 1e6:
                near, far = far, far * 2
                opts["distance"] = far
            for _ in range(40):  # bisection on the ratio of the distances: the projection shrinks as it grows
                mid = (near * far) ** 0.5
                opts["distance"] = mid
                near, far = (near, mid) if self.frame_fits(width, height, margin) else (mid, far)
            return float(far)
        finally:
            opts["distance"] = saved

    def framed_image(self, width: int, height: int, margin: float) -> QImage | None:
        """``render_image`` with the camera turned as it is but aimed so that the box with its labels sits in
        the middle of the picture, as close as ``margin`` allows; the camera is left as it was."""
        opts = self.opts
        saved = opts["distance"], QVector3D(opts["center"])
        opts["center"] = QVector3D(0.0, 0.0, 0.0)
        try:
            for _ in range(3):  # fit, then move the aim so that what is drawn sits in the middle, and fit again
                opts["distance"] = self.fitting_distance(width, height, margin)
                extent = self.frame_extent(width, height)
                if extent is None or self.width() < 1:
                    break
                (left, top), (right, bottom) = extent
                per_pixel = self.width() / width  # pan() moves the picture by pixels of the widget (y down)
                self.pan(-(left + right - width) / 2 * per_pixel, -(top + bottom - height) / 2 * per_pixel, 0,
                         relative="view")
            opts["distance"] = self.fitting_distance(width, height, margin)
            return self.render_image(width, height)
        finally:
            opts["distance"], opts["center"] = saved
            self.update()

    # ------------------------------------------------------------ drawing
    def _smooth_framebuffer(self, width: int, height: int):
        if self._smooth_failed:
            return None
        fbo = self._smooth
        if fbo is None or fbo.width() != width or fbo.height() != height:
            self._smooth = None
            fbo = _framebuffer(width, height, SMOOTH_SAMPLES)
            if not fbo.isValid():
                self._smooth_failed = True
                return None
            self._smooth = fbo
        return fbo

    def paintGL(self):
        w, h = self.deviceWidth(), self.deviceHeight()
        target = self.defaultFramebufferObject()
        fbo = None if self.moving else self._smooth_framebuffer(w, h)
        if fbo is not None:
            fbo.bind()
        super().paintGL()
        if fbo is not None:  # resolve the samples into the widget's framebuffer
            GL.glBindFramebuffer(GL.GL_READ_FRAMEBUFFER, fbo.handle())
            GL.glBindFramebuffer(GL.GL_DRAW_FRAMEBUFFER, target)
            GL.glBlitFramebuffer(0, 0, w, h, 0, 0, w, h, GL.GL_COLOR_BUFFER_BIT, GL.GL_NEAREST)
            GL.glBindFramebuffer(GL.GL_FRAMEBUFFER, target)
        if self.labels:  # into the framebuffer being drawn: a QPainter on the widget itself is redirected
            # while the window is grabbed (screenshots), and the labels went under the scene there
            device = QOpenGLPaintDevice(w, h)
            device.setDevicePixelRatio(self.devicePixelRatioF())
            painter = QPainter(device)
            paint_labels(painter, self.labels, self.label_points(self.width(), self.height()))
            painter.end()

    def render_image(self, width: int, height: int) -> QImage | None:
        """The scene with its labels as a ``width`` x ``height`` picture drawn off screen (multisampled where
        the driver allows); None without an OpenGL context or framebuffer."""
        if not self.isValid() or self.context() is None:
            return None
        width, height = max(1, int(width)), max(1, int(height))
        self.makeCurrent()
        try:
            limit = int(GL.glGetIntegerv(GL.GL_MAX_RENDERBUFFER_SIZE))
            if max(width, height) > limit:
                return None
            fbo = _framebuffer(width, height, 0 if self._smooth_failed else SMOOTH_SAMPLES)
            if not fbo.isValid():
                fbo = _framebuffer(width, height, 0)
                if not fbo.isValid():
                    return None
            fbo.bind()
            GL.glViewport(0, 0, width, height)
            region = (0, 0, width, height)
            self.paint(region=region, viewport=region)
            fbo.release()
            image = fbo.toImage().convertToFormat(QImage.Format.Format_ARGB32)
        finally:
            self.doneCurrent()
        if self.labels:
            painter = QPainter(image)
            paint_labels(painter, self.labels, self.label_points(width, height))
            painter.end()
        return image
